//! Graded 1-D cell-centred finite-volume mesh. Depth z positive downward, z = 0 at the
//! land surface.
//!
//! # Grading
//! The column is cut into segments at the layer interfaces, so every interface is a face.
//! In each segment the cells grow geometrically (factor `growth`) away from each end that
//! has a requested end size (the surface, the bottom, the interfaces), until they reach
//! the uniform size of the segment's middle part:
//! `s, s g, s g², …, s g^(K−1), u, u, …, u, …, s' g, s'` with `s g^(K−1) < u ≤ s g^K`,
//! so no two neighbours differ by more than the factor `g`. The uniform sizes are found so
//! that the total cell count is met exactly (or so that no cell exceeds a maximum size).

use std::fmt;

#[derive(Debug, Clone, PartialEq)]
pub struct Mesh {
    /// Face depths [m], n + 1 values, strictly increasing, faces[0] = 0.
    pub faces: Vec<f64>,
    /// Cell-centre depths [m] (midpoints of the faces), n values.
    pub centers: Vec<f64>,
    /// Cell widths [m], n values.
    pub widths: Vec<f64>,
}

/// How the cell sizes vary along the column.
#[derive(Debug, Clone, PartialEq)]
pub struct Grading {
    /// Ratio of neighbouring cell sizes in the graded parts, ≥ 1 (1 = uniform cells).
    pub growth: f64,
    /// Size of the first cell below the surface [m]; `None` = no grading there.
    pub surface_cell: Option<f64>,
    /// Size of the last cell above the bottom [m]; `None` = no grading there.
    pub bottom_cell: Option<f64>,
    /// Size of the cells on both sides of every layer interface [m]; `None` = no grading.
    pub interface_cell: Option<f64>,
}

impl Grading {
    /// Uniform cells in every segment.
    pub fn uniform() -> Self {
        Grading {
            growth: 1.0,
            surface_cell: None,
            bottom_cell: None,
            interface_cell: None,
        }
    }
}

/// How many cells: an exact count, or as few as possible with no cell larger than a size.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Resolution {
    Cells(usize),
    MaxCell(f64),
}

/// The most cells a mesh may have.
pub const MAX_CELLS: usize = 1_000_000;

/// Why a grading cannot be built. Depths in metres.
#[derive(Debug, Clone, PartialEq)]
pub enum MeshError {
    /// The requested count is below what the grading needs.
    TooFewCells { requested: usize, needed: usize },
    /// The requested count would make the uniform cells smaller than the end sizes.
    TooManyCells { requested: usize, allowed: usize },
    /// More than [`MAX_CELLS`] cells.
    AboveLimit { cells: usize },
    /// A segment (between two interfaces) is too thin for its end cell sizes.
    SegmentTooThin { top: f64, bottom: f64 },
    /// The maximum cell size is below an end cell size.
    MaxCellBelowEndSize { max_cell: f64, end_size: f64 },
}

impl fmt::Display for MeshError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            MeshError::TooFewCells { requested, needed } => write!(
                f,
                "{requested} cells cannot hold this grading: it needs at least {needed} cells \
                 (raise cells, the end cell sizes or growth)"
            ),
            MeshError::TooManyCells { requested, allowed } => write!(
                f,
                "{requested} cells are too many for this grading: above {allowed} cells the \
                 uniform cells would be smaller than the end cell sizes (lower cells or the \
                 end cell sizes)"
            ),
            MeshError::AboveLimit { cells } => {
                write!(f, "{cells} cells are more than the limit of {MAX_CELLS}")
            }
            MeshError::SegmentTooThin { top, bottom } => write!(
                f,
                "the segment from {top} m to {bottom} m is too thin for its end cell sizes \
                 (lower surface_cell_m, bottom_cell_m or interface_cell_m)"
            ),
            MeshError::MaxCellBelowEndSize { max_cell, end_size } => write!(
                f,
                "max_cell_m = {max_cell} is smaller than an end cell size ({end_size} m)"
            ),
        }
    }
}

/// A graded run of cells s, s g, s g², … from one end of a segment.
#[derive(Debug, Clone, Copy)]
struct Run {
    size: f64,
    growth: f64,
}

impl Run {
    /// Number of graded cells K for uniform size `w` (s g^(K−1) < w ≤ s g^K) and their
    /// total length G = s (g^K − 1)/(g − 1).
    fn cells(&self, w: f64) -> (usize, f64) {
        let (s, g) = (self.size, self.growth);
        if w <= s {
            return (0, 0.0);
        }
        let mut k = ((w / s).ln() / g.ln()).ceil().max(0.0) as usize;
        // Guard against rounding in the logarithms.
        while k > 0 && s * g.powi(k as i32 - 1) >= w {
            k -= 1;
        }
        while s * g.powi(k as i32) < w {
            k += 1;
        }
        (k, s * (g.powi(k as i32) - 1.0) / (g - 1.0))
    }
}

/// One segment between two refinement points.
#[derive(Debug, Clone)]
struct Segment {
    top: f64,
    bottom: f64,
    from_top: Option<Run>,
    from_bottom: Option<Run>,
    /// Smallest allowed uniform size (the larger end size) and largest feasible one.
    w_min: f64,
    w_max: f64,
    /// Fewest and most cells.
    lo: usize,
    hi: usize,
}

impl Segment {
    fn len(&self) -> f64 {
        self.bottom - self.top
    }
    fn runs(&self, w: f64) -> ((usize, f64), (usize, f64)) {
        let r = |run: &Option<Run>| run.map_or((0, 0.0), |r| r.cells(w));
        (r(&self.from_top), r(&self.from_bottom))
    }
    fn feasible(&self, w: f64) -> bool {
        let ((_, ga), (_, gb)) = self.runs(w);
        ga + gb <= self.len()
    }
    /// Real-valued cell count for uniform size `w` (continuous and decreasing in `w`).
    fn count(&self, w: f64) -> f64 {
        let w = w.clamp(self.w_min, self.w_max);
        let ((ka, ga), (kb, gb)) = self.runs(w);
        (ka + kb) as f64 + (self.len() - ga - gb) / w
    }
    /// The uniform size for which the segment holds exactly `n` cells.
    fn size_for(&self, n: usize) -> f64 {
        bisect(self.w_min, self.w_max, |w| self.count(w) >= n as f64)
    }
    /// Cell widths for `n` cells, top to bottom.
    fn widths(&self, n: usize) -> Vec<f64> {
        let w = self.size_for(n);
        let ((ka, ga), (kb, gb)) = self.runs(w);
        let top: Vec<f64> = self.from_top.map_or(vec![], |r| {
            (0..ka).map(|k| r.size * r.growth.powi(k as i32)).collect()
        });
        let bottom: Vec<f64> = self.from_bottom.map_or(vec![], |r| {
            (0..kb)
                .rev()
                .map(|k| r.size * r.growth.powi(k as i32))
                .collect()
        });
        let m = n.saturating_sub(ka + kb);
        let mut out = top;
        if m > 0 {
            let u = (self.len() - ga - gb) / m as f64;
            out.extend(std::iter::repeat_n(u, m));
        }
        out.extend(bottom);
        if m == 0 {
            // The graded runs meet exactly; absorb the rounding.
            let scale = self.len() / (ga + gb);
            out.iter_mut().for_each(|x| *x *= scale);
        }
        out
    }
}

/// Largest `w` in [lo, hi] with `pred(w)` true, for a predicate true at `lo` and false
/// beyond some point (monotone).
fn bisect(lo: f64, hi: f64, pred: impl Fn(f64) -> bool) -> f64 {
    if pred(hi) {
        return hi;
    }
    let (mut a, mut b) = (lo, hi);
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if m <= a || m >= b {
            break;
        }
        if pred(m) {
            a = m;
        } else {
            b = m;
        }
    }
    a
}

const EPS: f64 = 1e-9;

impl Mesh {
    /// Builds the mesh from its face depths (validated by the caller).
    pub fn from_faces(faces: Vec<f64>) -> Mesh {
        let centers = faces.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect();
        let widths = faces.windows(2).map(|w| w[1] - w[0]).collect();
        Mesh {
            faces,
            centers,
            widths,
        }
    }
    pub fn n_cells(&self) -> usize {
        self.widths.len()
    }
    /// Depth of the bottom boundary L [m].
    pub fn depth(&self) -> f64 {
        *self.faces.last().unwrap_or(&0.0)
    }
    /// Smallest and largest cell width [m].
    pub fn width_range(&self) -> (f64, f64) {
        self.widths
            .iter()
            .fold((f64::INFINITY, 0.0_f64), |(lo, hi), &w| {
                (lo.min(w), hi.max(w))
            })
    }

    /// Builds a graded mesh. `boundaries` are the surface (0), the layer interfaces and the
    /// bottom depth, strictly increasing (validated by the caller); each is a face.
    pub fn graded(
        boundaries: &[f64],
        grading: &Grading,
        resolution: Resolution,
    ) -> Result<Mesh, MeshError> {
        let graded = grading.growth > 1.0;
        let run = |size: Option<f64>| {
            size.filter(|_| graded).map(|size| Run {
                size,
                growth: grading.growth,
            })
        };
        let last = boundaries.len().saturating_sub(2);
        let mut segments = Vec::new();
        for (i, pair) in boundaries.windows(2).enumerate() {
            let (top, bottom) = (pair[0], pair[1]);
            let from_top = run(if i == 0 {
                grading.surface_cell
            } else {
                grading.interface_cell
            });
            let from_bottom = run(if i == last {
                grading.bottom_cell
            } else {
                grading.interface_cell
            });
            let len = bottom - top;
            let w_min = from_top
                .iter()
                .chain(from_bottom.iter())
                .map(|r| r.size)
                .fold(0.0, f64::max);
            let mut seg = Segment {
                top,
                bottom,
                from_top,
                from_bottom,
                w_min: w_min.max(len * 1e-12),
                w_max: len,
                lo: 1,
                hi: usize::MAX,
            };
            if seg.w_min > len || !seg.feasible(seg.w_min) {
                return Err(MeshError::SegmentTooThin { top, bottom });
            }
            seg.w_max = bisect(seg.w_min, len, |w| seg.feasible(w));
            seg.lo = ((seg.count(seg.w_max) - EPS).ceil() as usize).max(1);
            if w_min > 0.0 {
                let hi = (seg.count(seg.w_min) + EPS).floor();
                seg.hi = if hi > MAX_CELLS as f64 {
                    usize::MAX
                } else {
                    hi as usize
                };
                if seg.hi < seg.lo {
                    return Err(MeshError::SegmentTooThin { top, bottom });
                }
            }
            segments.push(seg);
        }

        let counts = match resolution {
            Resolution::Cells(n) => allocate(&segments, n)?,
            Resolution::MaxCell(h) => {
                let mut counts = Vec::with_capacity(segments.len());
                for seg in &segments {
                    if h < seg.w_min {
                        return Err(MeshError::MaxCellBelowEndSize {
                            max_cell: h,
                            end_size: seg.w_min,
                        });
                    }
                    let c = seg.count(h);
                    if c > MAX_CELLS as f64 {
                        return Err(MeshError::AboveLimit { cells: c as usize });
                    }
                    counts.push(((c - EPS).ceil() as usize).max(seg.lo));
                }
                let total: usize = counts.iter().sum();
                if total > MAX_CELLS {
                    return Err(MeshError::AboveLimit { cells: total });
                }
                counts
            }
        };

        let mut faces = vec![boundaries[0]];
        for (seg, &n) in segments.iter().zip(&counts) {
            let widths = seg.widths(n);
            let mut z = seg.top;
            for w in &widths[..widths.len() - 1] {
                z += w;
                faces.push(z);
            }
            faces.push(seg.bottom);
        }
        Ok(Mesh::from_faces(faces))
    }
}

/// Distributes `n` cells over the segments: a common uniform size first, then whole counts
/// by largest remainder within each segment's bounds.
fn allocate(segments: &[Segment], n: usize) -> Result<Vec<usize>, MeshError> {
    if n > MAX_CELLS {
        return Err(MeshError::AboveLimit { cells: n });
    }
    let lo: usize = segments.iter().map(|s| s.lo).sum();
    let hi = segments
        .iter()
        .map(|s| s.hi)
        .fold(0usize, |a, b| a.saturating_add(b));
    if n < lo {
        return Err(MeshError::TooFewCells {
            requested: n,
            needed: lo,
        });
    }
    if n > hi {
        return Err(MeshError::TooManyCells {
            requested: n,
            allowed: hi,
        });
    }
    let total = |w: f64| segments.iter().map(|s| s.count(w)).sum::<f64>();
    let w_lo = segments
        .iter()
        .map(|s| s.w_min)
        .fold(f64::INFINITY, f64::min);
    let w_hi = segments.iter().map(|s| s.w_max).fold(0.0, f64::max);
    let w = bisect(w_lo, w_hi, |w| total(w) >= n as f64);
    let real: Vec<f64> = segments.iter().map(|s| s.count(w)).collect();
    let mut counts: Vec<usize> = segments
        .iter()
        .zip(&real)
        .map(|(s, &c)| ((c + EPS).floor() as usize).clamp(s.lo, s.hi))
        .collect();
    loop {
        let sum: usize = counts.iter().sum();
        if sum == n {
            break;
        }
        let grow = sum < n;
        // The segment furthest from its real count in the needed direction, within bounds.
        let pick = (0..segments.len())
            .filter(|&i| {
                if grow {
                    counts[i] < segments[i].hi
                } else {
                    counts[i] > segments[i].lo
                }
            })
            .max_by(|&a, &b| {
                let d = |i: usize| {
                    let diff = real[i] - counts[i] as f64;
                    if grow {
                        diff
                    } else {
                        -diff
                    }
                };
                d(a).total_cmp(&d(b))
            });
        match pick {
            Some(i) if grow => counts[i] += 1,
            Some(i) => counts[i] -= 1,
            // Unreachable given lo ≤ n ≤ hi; report rather than loop.
            None => {
                return Err(MeshError::TooFewCells {
                    requested: n,
                    needed: lo,
                })
            }
        }
    }
    Ok(counts)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bench() -> Mesh {
        let g = Grading {
            growth: 1.05,
            surface_cell: Some(0.01),
            bottom_cell: Some(0.05),
            interface_cell: None,
        };
        Mesh::graded(&[0.0, 300.0], &g, Resolution::Cells(600)).unwrap()
    }

    #[test]
    fn benchmark_grading() {
        let m = bench();
        assert_eq!(m.n_cells(), 600);
        assert!((m.widths[0] - 0.01).abs() < 1e-12);
        assert!((m.widths[599] - 0.05).abs() < 1e-9);
        assert!((m.widths[1] / m.widths[0] - 1.05).abs() < 1e-12);
        for w in m.widths.windows(2) {
            let r = w[1] / w[0];
            assert!((1.0 / 1.05 - 1e-9..=1.05 + 1e-9).contains(&r), "{r}");
        }
        assert_eq!(m.depth(), 300.0);
    }

    #[test]
    fn interfaces_are_faces() {
        let g = Grading {
            growth: 1.1,
            surface_cell: Some(0.01),
            bottom_cell: Some(0.1),
            interface_cell: Some(0.02),
        };
        let m = Mesh::graded(&[0.0, 3.7, 10.0, 50.0], &g, Resolution::Cells(200)).unwrap();
        assert_eq!(m.n_cells(), 200);
        for z in [3.7, 10.0, 50.0] {
            assert!(m.faces.contains(&z));
        }
        let m = Mesh::graded(&[0.0, 3.7, 10.0, 50.0], &g, Resolution::MaxCell(0.5)).unwrap();
        assert!(m.width_range().1 <= 0.5 + 1e-12);
    }

    #[test]
    fn too_few_cells() {
        let g = Grading {
            growth: 1.05,
            surface_cell: Some(0.01),
            bottom_cell: Some(0.05),
            interface_cell: None,
        };
        let e = Mesh::graded(&[0.0, 300.0], &g, Resolution::Cells(50)).unwrap_err();
        assert!(matches!(e, MeshError::TooFewCells { .. }), "{e}");
        let e = Mesh::graded(&[0.0, 300.0], &g, Resolution::Cells(100_000)).unwrap_err();
        assert!(matches!(e, MeshError::TooManyCells { .. }), "{e}");
    }

    #[test]
    fn uniform() {
        let m = Mesh::graded(&[0.0, 1.0, 4.0], &Grading::uniform(), Resolution::Cells(8)).unwrap();
        assert_eq!(m.n_cells(), 8);
        assert!(m.widths.iter().all(|w| (w - 0.5).abs() < 1e-12));
    }
}
