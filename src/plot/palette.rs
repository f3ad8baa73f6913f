//! The colours, marker shapes and dash patterns of deepdry's figures with several
//! series of different kinds (verification figures; the two lines of a series plot).
//!
//! Series k gets colour, marker and dash number k (mod 6), so two series differ in three
//! ways at once. The colours step in CIE L* lightness (16, 32, 45, 57, 72, 82) from a dark
//! navy through brown, blue and orange to a light sky blue and a straw yellow: printed in
//! grey, each is a different grey; the hues alternate between blue and orange/brown, the
//! pair that red–green colour-blind readers tell apart, so no two of them depend on the
//! red–green difference. Markers also differ in shape and lines in dash pattern, which
//! carry the distinction where colour and grey fail (a faint print, a projector).

use plotters::style::RGBColor;

/// The colours in order (see the module documentation for the choice).
pub const PALETTE: [RGBColor; 6] = [
    RGBColor(25, 35, 90),
    RGBColor(135, 45, 20),
    RGBColor(30, 110, 170),
    RGBColor(205, 115, 35),
    RGBColor(120, 185, 225),
    RGBColor(230, 205, 80),
];

/// Marker shapes, in order.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    Circle,
    Square,
    Triangle,
    Diamond,
    Cross,
    Plus,
}

/// The marker shapes in order.
pub const MARKERS: [Marker; 6] = [
    Marker::Circle,
    Marker::Square,
    Marker::Triangle,
    Marker::Diamond,
    Marker::Cross,
    Marker::Plus,
];

/// Dash patterns in order: (dash, gap) in pixels; `None` is a solid line.
pub const DASHES: [Option<(u32, u32)>; 6] = [
    None,
    Some((10, 5)),
    Some((3, 4)),
    Some((16, 6)),
    Some((6, 3)),
    Some((2, 7)),
];

/// Colour, marker and dash of series number `k`.
pub fn style(k: usize) -> (RGBColor, Marker, Option<(u32, u32)>) {
    (
        PALETTE[k % PALETTE.len()],
        MARKERS[k % MARKERS.len()],
        DASHES[k % DASHES.len()],
    )
}

/// CIE 1976 L* lightness (0 black to 100 white) of an sRGB colour (IEC 61966-2-1
/// transfer function, D65 luminance weights 0.2126, 0.7152, 0.0722).
pub fn lightness(c: RGBColor) -> f64 {
    let lin = |v: u8| {
        let v = f64::from(v) / 255.0;
        if v <= 0.04045 {
            v / 12.92
        } else {
            ((v + 0.055) / 1.055).powf(2.4)
        }
    };
    let y = 0.2126 * lin(c.0) + 0.7152 * lin(c.1) + 0.0722 * lin(c.2);
    if y > 216.0 / 24389.0 {
        116.0 * y.cbrt() - 16.0
    } else {
        24389.0 / 27.0 * y
    }
}
