//! The optional `[vegetation]` section (or `[[vegetation]]` periods): potential
//! transpiration, the root distribution and the water-stress heads. Keys, units and
//! ranges are documented in `docs/case-file.md` (section "Vegetation").

use super::build::{num, read_periods};
use super::csvfile::{self, Header};
use super::schedules::{self, fmt_g, Quantity};
use super::tree::{Table, Value};
use crate::error::Error;
use crate::mesh::Mesh;
use crate::model::{Periods, RootShape, TimeControl, Vegetation};
use crate::props::constants::SECONDS_PER_YEAR;

type R<T> = Result<T, Error>;

/// Keys of one vegetation period.
pub const VEGETATION_KEYS: &[&str] = &[
    "from_year",
    "none",
    "transpiration_mm_per_year",
    "root_depth_m",
    "root_distribution",
    "root_beta",
    "root_csv",
    "stress_heads_m",
];

/// Potential transpiration [mm/yr in the file, m/s in the model].
pub const TRANSPIRATION: Quantity = Quantity {
    unit: "mm/yr",
    scale: 1.0e-3 / SECONDS_PER_YEAR,
    offset: 0.0,
    lo: 0.0,
    hi: 1.0e5,
    lo_open: false,
    note: " (potential transpiration, water depth per year)",
};

/// Default stress heads h1..h4 [m]: demo values for a desert shrub (uptake stops wetter
/// than −0.1 m, is full from −0.25 m to −100 m and falls to 0 at −700 m, about −7 MPa;
/// from memory of the range given for desert shrubs, −6 to −8 MPa). Site-specific: give
/// your own.
pub const DESERT_SHRUB_HEADS: [f64; 4] = [-0.1, -0.25, -100.0, -700.0];

/// Reads the vegetation periods (absent: no plants at any time).
pub fn read_vegetation(
    root: &Table,
    time: &TimeControl,
    mesh: &Mesh,
) -> R<Periods<Option<Vegetation>>> {
    if !root.has("vegetation") {
        return Ok(Periods::single(None));
    }
    read_periods(root, "vegetation", time, VEGETATION_KEYS, |t| {
        read_period(t, mesh)
    })
}

fn read_period(t: &Table, mesh: &Mesh) -> R<Option<Vegetation>> {
    if let Some(v) = t.get("none") {
        if !v.bool()? {
            return Err(v.err("write `none = true` for a period without plants, or omit it"));
        }
        for k in VEGETATION_KEYS
            .iter()
            .filter(|k| !["from_year", "none"].contains(k))
        {
            t.only_with(k, "plants (not with none = true)")?;
        }
        return Ok(None);
    }
    let transpiration = schedules::read(
        &t.req(
            "transpiration_mm_per_year",
            "potential transpiration, mm/yr (or none = true for no plants)",
        )?,
        "transpiration_mm_per_year",
        &TRANSPIRATION,
    )?;
    let depth = mesh.faces.last().copied().unwrap_or(0.0);
    let root_depth = |t: &Table| -> R<f64> {
        num(
            &t.req("root_depth_m", "depth of the deepest roots")?,
            |d| d > 0.0 && d <= depth,
            &format!("must be in (0, {}] m (inside the column)", fmt_g(depth)),
        )
    };
    let roots = match t.get("root_csv") {
        Some(f) => {
            for k in ["root_depth_m", "root_distribution", "root_beta"] {
                t.only_with(
                    k,
                    "a root distribution given by formula (not with root_csv)",
                )?;
            }
            read_root_table(&f, depth)?
        }
        None => {
            let shape = match t.get("root_distribution") {
                Some(v) => v.choice(&["uniform", "linear", "asymptotic"])?,
                None => "uniform",
            };
            if shape != "asymptotic" {
                t.only_with("root_beta", "root_distribution = \"asymptotic\"")?;
            }
            let d = root_depth(t)?;
            match shape {
                "uniform" => RootShape::Uniform { depth: d },
                "linear" => RootShape::Linear { depth: d },
                _ => RootShape::Asymptotic {
                    beta: num(
                        &t.req(
                            "root_beta",
                            "the extinction coefficient β of Jackson et al. (1996), e.g. 0.97",
                        )?,
                        |b| b > 0.0 && b < 1.0,
                        "must be in (0, 1) (the fraction of roots above d cm is 1 − β^d)",
                    )?,
                    depth: d,
                },
            }
        }
    };
    let stress_heads = match t.get("stress_heads_m") {
        None => DESERT_SHRUB_HEADS,
        Some(v) => {
            let items = v.array()?;
            if items.len() != 4 {
                return Err(v.err(format!(
                    "needs 4 heads [h1, h2, h3, h4] (m), found {}",
                    items.len()
                )));
            }
            let mut h = [0.0; 4];
            for (k, item) in items.iter().enumerate() {
                h[k] = item.f64()?;
            }
            if !(h[0] <= 0.0 && h[0] > h[1] && h[1] > h[2] && h[2] > h[3] && h[3] >= -1.0e6) {
                return Err(v.err(
                    "must be 0 ≥ h1 > h2 > h3 > h4 ≥ -1e6 m (no uptake wetter than h1, full from h2 to h3, none at the wilting head h4)",
                ));
            }
            h
        }
    };
    let root_fraction = root_fractions(&roots, &mesh.faces);
    Ok(Some(Vegetation {
        transpiration,
        root_fraction,
        roots,
        stress_heads,
    }))
}

/// A root table from CSV with the header `depth_m,root_density` (any unit of density:
/// only its shape counts).
fn read_root_table(file: &Value, depth: f64) -> R<RootShape> {
    let (cols, _) = csvfile::read(
        file,
        Header::Exact(&["depth_m", "root_density"]),
        "root distribution",
    )?;
    cols.depth_profile(depth)?;
    for (row, &d) in cols.columns[1].iter().enumerate() {
        if !(d >= 0.0 && d.is_finite()) {
            return Err(cols.err(row, format!("root_density = {d}: must be ≥ 0")));
        }
    }
    if cols.columns[1].iter().all(|&d| d == 0.0) {
        return Err(cols.err(0, "every root_density is 0: no roots"));
    }
    Ok(RootShape::Table {
        depth: cols.columns[0].clone(),
        density: cols.columns[1].clone(),
    })
}

/// Fraction of the roots in each cell between `faces` (sums to 1): the root distribution
/// integrated exactly over each cell.
pub fn root_fractions(shape: &RootShape, faces: &[f64]) -> Vec<f64> {
    // Cumulative fraction of the roots above depth z (not normalised for tables).
    let cumulative = |z: f64| -> f64 {
        match shape {
            RootShape::Uniform { depth } => z.min(*depth) / depth,
            RootShape::Linear { depth } => {
                let x = z.min(*depth) / depth;
                2.0 * x - x * x
            }
            RootShape::Asymptotic { beta, depth } => {
                // Depth in cm in the published form.
                (1.0 - beta.powf(100.0 * z.min(*depth))) / (1.0 - beta.powf(100.0 * depth))
            }
            RootShape::Table { depth, density } => {
                // ∫0^z of the piecewise-linear density (0 above the first and below the
                // last row).
                let mut sum = 0.0;
                for k in 1..depth.len() {
                    let (a, b) = (depth[k - 1], depth[k]);
                    if z <= a {
                        break;
                    }
                    let e = z.min(b);
                    let slope = (density[k] - density[k - 1]) / (b - a);
                    let de = density[k - 1] + slope * (e - a);
                    sum += 0.5 * (density[k - 1] + de) * (e - a);
                }
                sum
            }
        }
    };
    let mut out: Vec<f64> = faces
        .windows(2)
        .map(|w| (cumulative(w[1]) - cumulative(w[0])).max(0.0))
        .collect();
    let total: f64 = out.iter().sum();
    if total > 0.0 {
        for f in out.iter_mut() {
            *f /= total;
        }
    }
    out
}
