//! Retention laws θ(h) and their matching relative conductivity Kr(h) (Mualem 1976).
//! STUB: types fixed; implementations to be written.

/// The base retention law. Heads in metres (negative when unsaturated).
#[derive(Debug, Clone, PartialEq)]
pub enum RetentionLaw {
    /// van Genuchten (1980) with m = 1 − 1/n; Mualem (1976) conductivity with pore
    /// connectivity `l` (0.5 in the original).
    VanGenuchten {
        theta_r: f64,
        theta_s: f64,
        alpha: f64,
        n: f64,
        l: f64,
    },
    /// Brooks & Corey (1964): Se = (h/hb)^(−λ) below the air-entry head; Mualem conductivity.
    /// `air_entry` is the magnitude |hb| [m].
    BrooksCorey {
        theta_r: f64,
        theta_s: f64,
        air_entry: f64,
        lambda: f64,
        l: f64,
    },
    /// Exponential (Gardner 1958 type): θ = θr + (θs − θr) e^(αh), Kr = e^(αh).
    Exponential {
        theta_r: f64,
        theta_s: f64,
        alpha: f64,
    },
}

/// Extension of the retention curve to oven dryness.
#[derive(Debug, Clone, PartialEq)]
pub enum DryEnd {
    /// Fayer & Simmons (1995): θr is replaced by an adsorbed-water term that vanishes at
    /// the oven-dry head `oven_dry_head` [m, negative].
    FayerSimmons { oven_dry_head: f64 },
}

#[derive(Debug, Clone, PartialEq)]
pub struct Retention {
    pub law: RetentionLaw,
    pub dry_end: Option<DryEnd>,
}

impl Retention {
    /// Saturated liquid content θs = porosity used by the balance laws [m³ m⁻³].
    pub fn theta_s(&self) -> f64 {
        todo!()
    }
    /// Liquid content θ(h) [m³ m⁻³] and dθ/dh [m⁻¹].
    pub fn theta(&self, h: f64) -> (f64, f64) {
        let _ = h;
        todo!()
    }
    /// Relative conductivity Kr(h) [-] and dKr/dh [m⁻¹].
    pub fn relative_conductivity(&self, h: f64) -> (f64, f64) {
        let _ = h;
        todo!()
    }
    /// Head [m] at which θ(h) = `theta`; `None` when `theta` is outside the curve's range.
    pub fn head_from_theta(&self, theta: f64) -> Option<f64> {
        let _ = theta;
        todo!()
    }
}
