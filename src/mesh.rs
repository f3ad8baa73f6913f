//! Graded 1-D cell-centred finite-volume mesh. Depth z positive downward, z = 0 at the
//! land surface. STUB: type fixed; construction to be written.

#[derive(Debug, Clone, PartialEq)]
pub struct Mesh {
    /// Face depths [m], n + 1 values, strictly increasing, faces[0] = 0.
    pub faces: Vec<f64>,
    /// Cell-centre depths [m] (midpoints of the faces), n values.
    pub centers: Vec<f64>,
    /// Cell widths [m], n values.
    pub widths: Vec<f64>,
}

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
}
