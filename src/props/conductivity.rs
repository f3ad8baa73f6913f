//! Hydraulic conductivity at faces and its temperature dependence.

/// How the conductivity at a face between two cells is formed from the cell values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FaceAveraging {
    /// (K1 + K2)/2 weighted by distance.
    Arithmetic,
    /// √(K1 K2).
    Geometric,
    /// Distance-weighted harmonic mean (series conductance).
    Harmonic,
    /// The value of the cell the liquid flows from.
    Upstream,
}
