//! The figures' colours, marker shapes and drawing order: a palette of our own readable in
//! grey (lightness steps), reference lines drawn over the model's markers, and legends that
//! do not cover data.

use deepdry::plot::palette::{lightness, style, DASHES, MARKERS, PALETTE};
use deepdry::verify::{figures, Figure, Series};

#[test]
fn the_palette_steps_in_lightness() {
    // CIE 1976 L* of sRGB (IEC 61966-2-1): black 0, white 100, and sRGB grey 119 is
    // L* ≈ 50 (common practice: the mid-grey of sRGB).
    use plotters::style::RGBColor;
    assert!(lightness(RGBColor(0, 0, 0)).abs() < 1e-9);
    assert!((lightness(RGBColor(255, 255, 255)) - 100.0).abs() < 1e-6);
    assert!((lightness(RGBColor(119, 119, 119)) - 50.0).abs() < 0.5);
    // Each colour at least 10 L* units lighter than the one before: distinct greys when
    // printed without colour.
    let l: Vec<f64> = PALETTE.iter().map(|c| lightness(*c)).collect();
    assert!(l.windows(2).all(|w| w[1] - w[0] >= 10.0), "{l:?}");
    // Series differ in marker shape and dash pattern too.
    for k in 0..MARKERS.len() {
        for j in 0..k {
            assert_ne!(MARKERS[k], MARKERS[j]);
            assert_ne!(DASHES[k], DASHES[j]);
        }
    }
    assert_eq!(style(6), style(0));
}

fn figure() -> Figure {
    let xs: Vec<f64> = (0..=40).map(|k| k as f64 * 0.1).collect();
    Figure::new("style test", "x", "y")
        .with(Series::line(
            "reference",
            xs.iter().map(|x| (*x, x.sqrt())).collect(),
        ))
        .with(Series::points(
            "model",
            xs.iter().map(|x| (*x, x.sqrt() * 1.001)).collect(),
        ))
}

fn hex(c: plotters::style::RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
}

#[test]
fn reference_lines_are_drawn_over_markers_and_the_legend_is_below_the_data() {
    let svg = figures::svg(&figure()).unwrap();
    // The default colour cycle of a widely used plotting library (from memory) is gone.
    for c in [
        "#1F77B4", "#D62728", "#2CA02C", "#9467BD", "#FF7F0E", "#17BECF",
    ] {
        assert!(!svg.to_uppercase().contains(c), "{c} in the figure");
    }
    let line = format!("stroke=\"{}\"", hex(PALETTE[0]));
    let marker = format!("fill=\"{}\"", hex(PALETTE[1]));
    let first_line = svg.find(&line).expect("reference line drawn");
    let first_marker = svg.find(&marker).expect("markers drawn");
    // Markers of the plot come before the line in the document (drawn earlier: below);
    // only the legend's sample marker follows the line.
    let markers_before = svg[..first_line].matches(&marker).count();
    let markers_after = svg[first_line..].matches(&marker).count();
    assert!(first_marker < first_line);
    assert_eq!((markers_before, markers_after), (41, 1));

    // Every y pixel of the data (the markers' points) is above the legend's texts.
    let max_data_y = svg
        .split("<polygon")
        .skip(1)
        .filter(|e| e.contains(&marker))
        .take(41)
        .flat_map(|e| {
            let pts = e
                .split("points=\"")
                .nth(1)
                .unwrap()
                .split('"')
                .next()
                .unwrap();
            pts.split_whitespace()
                .map(|p| p.split(',').nth(1).unwrap().parse::<f64>().unwrap())
                .collect::<Vec<_>>()
        })
        .fold(f64::NEG_INFINITY, f64::max);
    let legend_y: Vec<f64> = ["reference", "model"]
        .iter()
        .map(|label| {
            let at = svg.find(&format!("\n{label}\n")).expect("legend entry");
            let tag = &svg[svg[..at].rfind("<text").unwrap()..at];
            tag.split(" y=\"")
                .nth(1)
                .unwrap()
                .split('"')
                .next()
                .unwrap()
                .parse()
                .unwrap()
        })
        .collect();
    assert!(max_data_y.is_finite());
    assert!(
        legend_y.iter().all(|y| *y > max_data_y + 20.0),
        "{legend_y:?} vs {max_data_y}"
    );
}
