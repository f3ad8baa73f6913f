//! Solutes carried by the liquid water (chloride and the like): transport, surface input,
//! and the chloride mass-balance diagnostics.
//!
//! For each solute, per cell, the unknown is the mass per bulk volume `m` [g m⁻³] (in
//! solution and, above an optional solubility limit, as a solid); the concentration in the
//! liquid is `c = m/θl`, or the solubility `cs` where `m > θl cs` (the excess is the
//! precipitate). The balance of a cell of width `w` between faces `i` (above) and `i+1`:
//!
//! `w dm/dt = J_i − J_{i+1}`,  `J = q c_up − (θl Dm + αL |q|) ∂c/∂z`  (positive downward)
//!
//! with `q` the liquid Darcy flux [m s⁻¹] of the flow step, `c_up` the concentration of the
//! upstream cell (first-order upwind), `Dm = D0(T) θl^{7/3}/φ²` (Millington & Quirk 1961,
//! liquid-phase form) with `D0(T) = D0(25 °C) (T/298.15 K) μ(298.15 K)/μ(T)`
//! (Stokes–Einstein scaling, common practice) and the face value of `θl Dm` the
//! distance-weighted harmonic mean of the two cells' (conductances in series). Vapour
//! carries no solute, so evaporation concentrates it.
//!
//! **Time integration.** After each accepted flow step, the solute balance is solved with
//! that step's own formula (the BDF weights α of [`StepInfo`]): `w (α0 m + Σ_{j≥1} αj
//! m_j) = J_i − J_{i+1}`, with the step's accepted liquid fluxes and contents at the new
//! time. With `c` constant, these are the liquid-water terms of the flow equations, so a
//! uniform concentration stays uniform where no water evaporates, at any order; the
//! cumulative surface and bottom inflows are integrated by the same formula, so the
//! balance `Σ w (m − m0) − (W_top − W_bottom)` closes to round-off (the BDF weights sum to
//! zero). The system is linear in `m` (without a solubility limit: one tridiagonal solve
//! per solute and step); with a solubility limit it is piecewise linear and solved by
//! Newton's method, which stops when the set of saturated cells no longer changes.
//!
//! **Non-negative concentrations.** Upwind advection with implicit diffusion gives an
//! M-matrix; with backward Euler (order 1) every concentration is then ≥ 0. The history
//! terms of higher orders can still undershoot at a sharp front; any negative mass left by
//! the solve is taken from the neighbouring cells (their mass in proportion), so the
//! total is kept exactly and no concentration is negative. The numerical dispersion of
//! upwinding is about Δz/2 (added to αL); `deepdry check` reports it.

use crate::error::{Error, Result};
use crate::model::{Model, Solute, SoluteBottom, SoluteInitial, SoluteSurface};
use crate::physics::System;
use crate::props::constants::SECONDS_PER_YEAR;
use crate::solve::stepper::{StepInfo, StepState};

/// Number of series values per solute (see [`SERIES_FIELDS`]).
pub const SERIES_PER_SOLUTE: usize = 9;

/// Cumulative flows kept per solute: surface inflow, bottom outflow, throughput, root
/// uptake [g m⁻²].
pub const CUMULATIVE: usize = 4;

/// The series per solute: name prefix (the dataset is `<prefix>_<solute>`), units, long
/// name, in the order of [`SoluteColumn::series_values`].
pub const SERIES_FIELDS: [(&str, &str, &str); SERIES_PER_SOLUTE] = [
    (
        "storage",
        "g m-2",
        "solute stored in the column (dissolved and precipitated)",
    ),
    (
        "surface_cumulative",
        "g m-2",
        "solute that entered through the land surface since the start, positive downward",
    ),
    (
        "bottom_cumulative",
        "g m-2",
        "solute that left through the bottom boundary since the start, positive downward",
    ),
    (
        "balance_error",
        "g m-2",
        "cumulative storage change minus net inflow of the solute",
    ),
    (
        "balance_relative_error",
        "1",
        "solute balance error relative to max(|storage change|, boundary throughput, 1e-6 of the stored mass)",
    ),
    (
        "bulge_depth",
        "m",
        "depth of the largest concentration in the liquid (cell centre)",
    ),
    (
        "bulge_peak",
        "g m-3",
        "largest concentration in the liquid in the column",
    ),
    (
        "recharge_estimate",
        "mm year-1",
        "chloride mass-balance recharge estimate: mean deposition / concentration at recharge_depth_m",
    ),
    (
        "uptake_cumulative",
        "g m-2",
        "solute taken up with root water since the start (root_uptake_fraction of the concentration)",
    ),
];

/// One earlier point of the solute history (for the multistep formula).
#[derive(Debug, Clone, PartialEq)]
pub struct SolutePoint {
    /// Time [s].
    pub t: f64,
    /// Mass per bulk volume, solute after solute (`n` cells each) [g m⁻³].
    pub mass: Vec<f64>,
    /// Per solute: cumulative [surface inflow, bottom outflow, throughput] [g m⁻²].
    pub cumulative: Vec<f64>,
}

/// Everything needed to continue the solute transport exactly (checkpointed).
#[derive(Debug, Clone, PartialEq)]
pub struct SoluteState {
    /// The solutes' names, in the case's order.
    pub names: Vec<String>,
    /// The current point (time, masses, cumulative flows).
    pub now: SolutePoint,
    /// Masses at the start of the run [g m⁻³] (the storage change is summed cell by cell
    /// from these).
    pub initial_mass: Vec<f64>,
    /// Earlier points, newest first, at the times of the flow stepper's history.
    pub history: Vec<SolutePoint>,
    /// Osmotic head of each cell at the current point [m] (empty when no solute has an
    /// osmotic effect): the first guess of the next step's coupling iteration.
    pub osmotic_head: Vec<f64>,
}

/// The profiles of one solute at one time.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SoluteProfile {
    /// Concentration in the liquid [g m⁻³] (cells).
    pub concentration: Vec<f64>,
    /// Solute flux [g m⁻² s⁻¹] (faces, positive downward).
    pub flux: Vec<f64>,
    /// Accumulation age [year] (cells): mass from the surface to the cell centre divided by
    /// the mean deposition; NaN without deposition.
    pub accumulation_age: Vec<f64>,
    /// Precipitated solid [g m⁻³ of bulk] (cells); 0 without a solubility limit.
    pub precipitate: Vec<f64>,
}

/// Whether the dilute-range warning was given (once per process).
static DILUTE_WARNED: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Fraction of the stored mass below which a storage change is judged against it in the
/// relative balance error.
pub const RELATIVE_FLOOR: f64 = 1.0e-6;

/// Most history points kept (order 5 needs 5 earlier points besides the current one).
const MAX_HISTORY: usize = 6;

/// Newton iterations allowed with a solubility limit (the set of saturated cells settles
/// in a few).
const MAX_ITERATIONS: usize = 50;

/// The solute transport of a column: the solutes, their state and workspace.
#[derive(Debug, Clone)]
pub struct SoluteColumn {
    pub solutes: Vec<Solute>,
    pub state: SoluteState,
    n: usize,
    widths: Vec<f64>,
    /// Centre-to-face distances (above, below) [m] and cell centres [m].
    d_above: Vec<f64>,
    d_below: Vec<f64>,
    centers: Vec<f64>,
    /// Porosity (θs) of each cell's soil.
    porosity: Vec<f64>,
    /// Mean surface deposition of each solute over the run [g m⁻² s⁻¹] (NaN: none).
    pub mean_deposition: Vec<f64>,
    // Per step: liquid content, liquid face flux, diffusion conductance per unit D0.
    theta: Vec<f64>,
    q: Vec<f64>,
    /// Per face: θl Dm / distance per unit D0(25 °C) [m s⁻¹ per m² s⁻¹]; the bottom face
    /// (index n) to the boundary point on the face.
    g_face: Vec<f64>,
    // Tridiagonal system and Newton work.
    lower: Vec<f64>,
    diag: Vec<f64>,
    upper: Vec<f64>,
    rhs: Vec<f64>,
    hist: Vec<f64>,
    m: Vec<f64>,
    c: Vec<f64>,
    slope: Vec<f64>,
    /// Concentration [g m⁻³] and face flux [g m⁻² s⁻¹] of the last solve, solute after solute.
    pub conc: Vec<f64>,
    pub flux: Vec<f64>,
    /// Root water uptake of each cell [m³ of water per m² of column per s] (from the flow),
    /// and the solute uptake of the last solve [g m⁻² s⁻¹].
    water_uptake: Vec<f64>,
    uptake_rate: f64,
    /// The masses and cumulative flows being computed for the new time.
    next_mass: Vec<f64>,
    next_cumulative: Vec<f64>,
    factor: FactorTable,
}

/// T/μ(T) relative to its value at 25 °C (the Stokes–Einstein scaling of D0), with μ of
/// IAPWS 2008 ([`crate::props::water::viscosity`]).
fn diffusivity_factor_exact(t: f64) -> f64 {
    const T25: f64 = 298.15;
    let mu25 = crate::props::water::viscosity(T25).0;
    (t / T25) * mu25 / crate::props::water::viscosity(t).0
}

/// [`diffusivity_factor_exact`] tabulated every 0.05 K from 273.15 to 373.15 K and
/// interpolated linearly (held at the ends): the IAPWS viscosity per cell and step was a
/// fifth of a run's cost. The interpolation error is below 1e-7 relative (the factor is
/// smooth: |f''| h²/8 with h = 0.05 K), far below what D0 is known to.
#[derive(Debug, Clone)]
struct FactorTable {
    values: Vec<f64>,
}

impl FactorTable {
    const T0: f64 = 273.15;
    const STEP: f64 = 0.05;
    const POINTS: usize = 2001;

    fn new() -> FactorTable {
        FactorTable {
            values: (0..Self::POINTS)
                .map(|k| diffusivity_factor_exact(Self::T0 + k as f64 * Self::STEP))
                .collect(),
        }
    }

    #[inline]
    fn at(&self, t: f64) -> f64 {
        let x = ((t - Self::T0) / Self::STEP).clamp(0.0, (Self::POINTS - 1) as f64);
        let k = (x as usize).min(Self::POINTS - 2);
        let f = x - k as f64;
        self.values[k] + f * (self.values[k + 1] - self.values[k])
    }
}

/// Tridiagonal solve (Thomas algorithm) of `lower[i] x[i−1] + diag[i] x[i] + upper[i]
/// x[i+1] = rhs[i]`, in place in `rhs`; `diag` is overwritten. False on a zero pivot.
fn thomas(lower: &[f64], diag: &mut [f64], upper: &[f64], rhs: &mut [f64]) -> bool {
    let n = diag.len();
    for i in 1..n {
        if diag[i - 1] == 0.0 {
            return false;
        }
        let w = lower[i] / diag[i - 1];
        diag[i] -= w * upper[i - 1];
        rhs[i] -= w * rhs[i - 1];
    }
    if diag[n - 1] == 0.0 {
        return false;
    }
    rhs[n - 1] /= diag[n - 1];
    for i in (0..n - 1).rev() {
        rhs[i] = (rhs[i] - upper[i] * rhs[i + 1]) / diag[i];
    }
    rhs.iter().all(|x| x.is_finite())
}

/// Moves any negative mass to the neighbouring cells (in proportion to their mass), so
/// that no mass is negative and the total Σ w m is unchanged. Returns the mass moved
/// [g m⁻²].
fn clip_negative(m: &mut [f64], widths: &[f64]) -> f64 {
    let n = m.len();
    let mut moved = 0.0;
    for _pass in 0..n {
        let mut any = false;
        for i in 0..n {
            if m[i] >= 0.0 {
                continue;
            }
            any = true;
            let deficit = -m[i] * widths[i];
            moved += deficit;
            m[i] = 0.0;
            let left = if i > 0 {
                m[i - 1].max(0.0) * widths[i - 1]
            } else {
                0.0
            };
            let right = if i + 1 < n {
                m[i + 1].max(0.0) * widths[i + 1]
            } else {
                0.0
            };
            let total = left + right;
            // Take from the neighbours in proportion to their mass (from the one that
            // exists when neither holds any); they may turn negative and give on in turn.
            let (fl, fr) = if total > 0.0 {
                (left / total, right / total)
            } else if i > 0 {
                (1.0, 0.0)
            } else {
                (0.0, 1.0)
            };
            if i > 0 {
                m[i - 1] -= fl * deficit / widths[i - 1];
            }
            if i + 1 < n {
                m[i + 1] -= fr * deficit / widths[i + 1];
            }
        }
        if !any {
            break;
        }
    }
    moved
}

impl SoluteColumn {
    /// The transport of `model`'s solutes on its mesh, with a zero state (set it with
    /// [`SoluteColumn::start`] or [`SoluteColumn::set_state`]).
    pub fn new(model: &Model) -> SoluteColumn {
        let m = &model.mesh;
        let n = m.n_cells();
        let ns = model.solutes.len();
        let porosity = (0..n)
            .map(|i| model.soils[model.cell_soil[i]].retention.theta_s())
            .collect();
        let mean_deposition = model
            .solutes
            .iter()
            .map(|s| match &s.surface {
                SoluteSurface::Deposition(d) => {
                    // The exact mean over the run.
                    let (a, b) = (model.time.start, model.time.end);
                    d.integral(a, b) / (b - a)
                }
                SoluteSurface::Inflow(_) => f64::NAN,
            })
            .collect();
        let zero_point = || SolutePoint {
            t: model.time.start,
            mass: vec![0.0; ns * n],
            cumulative: vec![0.0; CUMULATIVE * ns],
        };
        SoluteColumn {
            solutes: model.solutes.clone(),
            state: SoluteState {
                names: model.solutes.iter().map(|s| s.name.clone()).collect(),
                now: zero_point(),
                initial_mass: vec![0.0; ns * n],
                history: Vec::new(),
                osmotic_head: Vec::new(),
            },
            n,
            widths: m.widths.clone(),
            d_above: (0..n).map(|i| m.centers[i] - m.faces[i]).collect(),
            d_below: (0..n).map(|i| m.faces[i + 1] - m.centers[i]).collect(),
            centers: m.centers.clone(),
            porosity,
            mean_deposition,
            theta: vec![0.0; n],
            q: vec![0.0; n + 1],
            g_face: vec![0.0; n + 1],
            lower: vec![0.0; n],
            diag: vec![0.0; n],
            upper: vec![0.0; n],
            rhs: vec![0.0; n],
            hist: vec![0.0; n],
            m: vec![0.0; n],
            c: vec![0.0; n],
            slope: vec![0.0; n],
            conc: vec![0.0; ns * n],
            flux: vec![0.0; ns * (n + 1)],
            water_uptake: vec![0.0; n],
            uptake_rate: 0.0,
            next_mass: vec![0.0; ns * n],
            next_cumulative: vec![0.0; CUMULATIVE * ns],
            factor: FactorTable::new(),
        }
    }

    pub fn count(&self) -> usize {
        self.solutes.len()
    }

    /// Reads what the transport needs from the flow evaluation in `sys` (at `u`): liquid
    /// contents, liquid face fluxes, and the diffusion conductances per unit D0.
    fn load_flow(&mut self, sys: &mut System, u: &[f64]) {
        sys.complete_face_parts(u);
        let n = self.n;
        // θl Dm per unit D0(25 °C), per cell.
        let mut g_prev = 0.0;
        for i in 0..n {
            let cell = &sys.cells[i];
            let theta = cell.theta.v.max(0.0);
            self.theta[i] = theta;
            let phi = self.porosity[i];
            // θ^{10/3} = θ³ θ^{1/3}.
            let g = self.factor.at(cell.t.v) * theta * theta * theta * theta.cbrt() / (phi * phi);
            if i > 0 {
                // Conductances in series from centre to centre.
                let r = self.d_below[i - 1] / g_prev + self.d_above[i] / g;
                self.g_face[i] = if r.is_finite() && r > 0.0 {
                    1.0 / r
                } else {
                    0.0
                };
            }
            g_prev = g;
        }
        self.g_face[0] = 0.0;
        self.g_face[n] = if self.d_below[n - 1] > 0.0 {
            g_prev / self.d_below[n - 1]
        } else {
            0.0
        };
        for (j, f) in sys.faces.iter().enumerate() {
            self.q[j] = f.liquid().v;
        }
        for (w, u) in self.water_uptake.iter_mut().zip(&sys.uptake) {
            *w = u / crate::props::constants::WATER_DENSITY;
        }
    }

    /// The dispersion-diffusion conductance of face `j` for solute `s` [m s⁻¹].
    #[inline]
    fn conductance(&self, s: &Solute, j: usize) -> f64 {
        let n = self.n;
        let dist = if j == 0 {
            return 0.0;
        } else if j == n {
            self.d_below[n - 1]
        } else {
            self.d_below[j - 1] + self.d_above[j]
        };
        let disp = if dist > 0.0 {
            s.dispersivity * self.q[j].abs() / dist
        } else {
            0.0
        };
        s.free_diffusivity * self.g_face[j] + disp
    }

    /// Concentrations and their slopes dc/dm from the masses in `self.m`.
    fn concentrations(&mut self, s: &Solute) {
        for i in 0..self.n {
            let th = self.theta[i];
            let m = self.m[i];
            let (c, dc) = if th > 0.0 {
                match s.solubility {
                    Some(cs) if m > th * cs => (cs, 0.0),
                    _ => (m / th, 1.0 / th),
                }
            } else {
                // No liquid: nothing in solution, the solute is held as a solid.
                (0.0, 0.0)
            };
            self.c[i] = c;
            self.slope[i] = dc;
        }
    }

    /// The face flux of face `j` as `a c_above + b c_below + f` (the boundary faces:
    /// `c_above`/`c_below` of the missing side is 0), for solute `s` at time `t`.
    #[inline]
    fn face_coefficients(&self, s: &Solute, j: usize, t: f64) -> (f64, f64, f64) {
        let n = self.n;
        let q = self.q[j];
        let (qp, qm) = (q.max(0.0), (-q).max(0.0));
        if j == 0 {
            // Surface: deposition enters whatever the water does; an inflow concentration
            // enters with infiltrating water only. Nothing leaves through the surface.
            // The input of a step ending at `t` is the schedule's value just before `t`
            // (its left limit): a step landing on a jump of a stepped schedule takes the
            // value that held over the step, so stepped deposition is integrated exactly.
            let before = t.next_down();
            return match &s.surface {
                SoluteSurface::Deposition(d) => (0.0, 0.0, d.value(before).max(0.0)),
                SoluteSurface::Inflow(c) => (0.0, 0.0, qp * c.value(before).max(0.0)),
            };
        }
        let e = self.conductance(s, j);
        if j == n {
            return match s.bottom {
                SoluteBottom::Concentration(cb) => (qp + e, 0.0, -(qm + e) * cb),
                SoluteBottom::ZeroGradient => (q, 0.0, 0.0),
            };
        }
        (qp + e, -qm - e, 0.0)
    }

    /// Solves the balance of solute `k` for the masses `self.m` (starting value in, solution
    /// out) with storage coefficient `c0` and history `self.hist` (already × width), at
    /// time `t`. `c0 = 0`: the steady state.
    fn solve_one(&mut self, k: usize, c0: f64, t: f64) -> Result<()> {
        let solutes = std::mem::take(&mut self.solutes);
        let result = self.solve_with(&solutes[k], c0, t);
        self.solutes = solutes;
        result
    }

    fn solve_with(&mut self, s: &Solute, c0: f64, t: f64) -> Result<()> {
        let n = self.n;
        let linear = s.solubility.is_none();
        let mut last_active: Option<Vec<bool>> = None;
        for _iter in 0..MAX_ITERATIONS {
            self.concentrations(s);
            // Residual R_i = w (c0 m + hist) − J_i + J_{i+1}, and its Jacobian in m.
            // Root uptake takes the fraction f_u of the concentration with the water.
            let fu = s.uptake_fraction;
            for i in 0..n {
                let up = fu * self.water_uptake[i];
                self.rhs[i] = self.widths[i] * c0 * self.m[i] + self.hist[i] + up * self.c[i];
                self.diag[i] = self.widths[i] * c0 + up * self.slope[i];
                self.lower[i] = 0.0;
                self.upper[i] = 0.0;
            }
            for j in 0..=n {
                let (a, b, f) = self.face_coefficients(s, j, t);
                let c_up = if j > 0 { self.c[j - 1] } else { 0.0 };
                let c_dn = if j < n { self.c[j] } else { 0.0 };
                let flux = a * c_up + b * c_dn + f;
                if j > 0 {
                    // + J_{i+1} in the row of the cell above (i = j − 1).
                    let i = j - 1;
                    self.rhs[i] += flux;
                    self.diag[i] += a * self.slope[i];
                    if j < n {
                        self.upper[i] += b * self.slope[j];
                    }
                }
                if j < n {
                    // − J_i in the row of the cell below (i = j).
                    self.rhs[j] -= flux;
                    self.diag[j] -= b * self.slope[j];
                    if j > 0 {
                        self.lower[j] -= a * self.slope[j - 1];
                    }
                }
            }
            // Newton update: J δ = −R.
            for r in self.rhs.iter_mut() {
                *r = -*r;
            }
            if !thomas(&self.lower, &mut self.diag, &self.upper, &mut self.rhs) {
                return Err(Error::Numerical(format!(
                    "solute `{}`: the transport system is singular at t = {:.6e} yr (no liquid water to carry the solute and no storage)",
                    s.name,
                    t / SECONDS_PER_YEAR
                )));
            }
            for (m, d) in self.m.iter_mut().zip(&self.rhs) {
                *m += d;
            }
            if linear {
                return Ok(());
            }
            // Piecewise linear: done when the saturated set no longer changes.
            let cs = s.solubility.unwrap_or(f64::INFINITY);
            let active: Vec<bool> = (0..n).map(|i| self.m[i] > self.theta[i] * cs).collect();
            if last_active.as_ref() == Some(&active) {
                return Ok(());
            }
            last_active = Some(active);
        }
        Err(Error::Numerical(format!(
            "solute `{}`: precipitation and dissolution did not settle in {MAX_ITERATIONS} iterations at t = {:.6e} yr",
            s.name,
            t / SECONDS_PER_YEAR
        )))
    }

    /// Fills `self.conc` and `self.flux` of solute `k` from the masses in `self.m` (after
    /// [`SoluteColumn::concentrations`]), at time `t`.
    fn store_profiles(&mut self, k: usize, t: f64) {
        let n = self.n;
        let solutes = std::mem::take(&mut self.solutes);
        let s = &solutes[k];
        self.concentrations(s);
        self.conc[k * n..(k + 1) * n].copy_from_slice(&self.c);
        self.uptake_rate = s.uptake_fraction
            * self
                .water_uptake
                .iter()
                .zip(&self.c)
                .map(|(w, c)| w * c)
                .sum::<f64>();
        let mut flux = std::mem::take(&mut self.flux);
        self.face_fluxes_into(s, t, &mut flux[k * (n + 1)..(k + 1) * (n + 1)]);
        self.flux = flux;
        self.solutes = solutes;
    }

    /// The face fluxes [g m⁻² s⁻¹] of solute `s` at time `t` from the concentrations in
    /// `self.c` into `out` (n + 1 faces).
    fn face_fluxes_into(&self, s: &Solute, t: f64, out: &mut [f64]) {
        let n = self.n;
        for (j, o) in out.iter_mut().enumerate() {
            let (a, b, f) = self.face_coefficients(s, j, t);
            let c_up = if j > 0 { self.c[j - 1] } else { 0.0 };
            let c_dn = if j < n { self.c[j] } else { 0.0 };
            *o = a * c_up + b * c_dn + f;
        }
    }

    /// Sets the initial state at time `t` from the case's initial solute profiles, with
    /// the flow evaluated at `u` in `sys`.
    pub fn start(&mut self, sys: &mut System, t: f64, u: &[f64]) -> Result<()> {
        self.load_flow(sys, u);
        let n = self.n;
        for k in 0..self.count() {
            let s = self.solutes[k].clone();
            match &s.initial {
                SoluteInitial::Constant(c) => {
                    for i in 0..n {
                        self.m[i] = self.theta[i] * c;
                    }
                }
                SoluteInitial::Profile {
                    depth,
                    concentration,
                } => {
                    for i in 0..n {
                        let c =
                            crate::fit::compare::interpolate(depth, concentration, self.centers[i]);
                        self.m[i] = self.theta[i] * c;
                    }
                }
                SoluteInitial::Steady => {
                    self.hist.iter_mut().for_each(|h| *h = 0.0);
                    self.m.iter_mut().for_each(|m| *m = 0.0);
                    self.solve_one(k, 0.0, t).map_err(|_| {
                        Error::input(format!(
                            "solute `{}`: initial_steady: there is no steady profile under the initial flow (the solute must be able to leave through the bottom: a downward liquid flux or bottom_concentration_g_per_m3); give initial_concentration_g_per_m3 or initial_csv instead",
                            s.name
                        ))
                    })?;
                    let largest = self.m.iter().fold(0.0f64, |a, b| a.max(b.abs()));
                    let unphysical = self.m.iter().any(|&m| m.is_nan() || m < -1e-9 * largest);
                    if unphysical {
                        return Err(Error::input(format!(
                            "solute `{}`: initial_steady: there is no steady profile under the initial flow with concentrations ≥ 0 (the initial flow does not carry the solute through the column); give initial_concentration_g_per_m3 or initial_csv instead",
                            s.name
                        )));
                    }
                    self.m.iter_mut().for_each(|m| *m = m.max(0.0));
                }
            }
            self.state.now.mass[k * n..(k + 1) * n].copy_from_slice(&self.m);
            self.store_profiles(k, t);
        }
        self.state.now.t = t;
        self.state.now.cumulative.iter_mut().for_each(|c| *c = 0.0);
        self.state.initial_mass.clone_from(&self.state.now.mass);
        self.state.history.clear();
        let mut heads = Vec::new();
        self.osmotic_heads_into(sys, &mut heads);
        self.state.osmotic_head = heads;
        Ok(())
    }

    /// Whether any solute lowers the vapour's relative humidity (osmotic effect).
    pub fn osmotic(&self) -> bool {
        self.solutes.iter().any(|s| s.osmotic.is_some())
    }

    /// The osmotic head of every cell [m] from the concentrations of the last solve and
    /// the temperatures of the flow evaluation in `sys`: ho = −Σ i (c/M) R T/(ρw g)
    /// (van 't Hoff, dilute solutions). Empty when no solute has an osmotic effect. Logs a
    /// warning (once per run) past 1 mol per kg of water, where van 't Hoff overstates
    /// the osmotic pressure of concentrated brines.
    pub fn osmotic_heads_into(&self, sys: &System, out: &mut Vec<f64>) {
        use crate::props::constants::{GAS_CONSTANT, GRAVITY, WATER_DENSITY};
        out.clear();
        if !self.osmotic() {
            return;
        }
        let n = self.n;
        out.resize(n, 0.0);
        for (k, s) in self.solutes.iter().enumerate() {
            let Some(o) = s.osmotic else { continue };
            for i in 0..n {
                let molar = self.conc[k * n + i] / o.molar_mass; // mol per m³ of liquid
                if molar > 1000.0 && !DILUTE_WARNED.swap(true, std::sync::atomic::Ordering::Relaxed)
                {
                    log::warn!(
                        "solute `{}`: {molar:.0} mol/m³ at depth {:.3} m, beyond the dilute range (about 1 mol/kg) where the van 't Hoff osmotic potential holds; it overstates the effect of a brine",
                        s.name,
                        self.centers[i]
                    );
                }
                let t = sys.cells[i].t.v;
                out[i] -= o.ions * molar * GAS_CONSTANT * t / (WATER_DENSITY * GRAVITY);
            }
        }
    }

    /// Continues from a saved state (a resumed run), with the flow evaluated at `u` in
    /// `sys`, or (`fresh`) starts from its masses with zero cumulative flows (a branch).
    pub fn set_state(
        &mut self,
        state: SoluteState,
        sys: &mut System,
        t: f64,
        u: &[f64],
        fresh: bool,
    ) -> Result<()> {
        let n = self.n;
        let ns = self.count();
        if state.names != self.state.names {
            return Err(Error::input(format!(
                "the checkpoint carries the solutes [{}], the case [{}]",
                state.names.join(", "),
                self.state.names.join(", ")
            )));
        }
        let ok = |p: &SolutePoint| p.mass.len() == ns * n && p.cumulative.len() == CUMULATIVE * ns;
        if !ok(&state.now) || state.initial_mass.len() != ns * n || !state.history.iter().all(ok) {
            return Err(Error::input(
                "the checkpoint's solute state does not fit the case's mesh".to_string(),
            ));
        }
        self.state = state;
        if fresh {
            self.state.now.t = t;
            self.state.now.cumulative.iter_mut().for_each(|c| *c = 0.0);
            self.state.initial_mass.clone_from(&self.state.now.mass);
            self.state.history.clear();
        }
        self.load_flow(sys, u);
        let t = self.state.now.t;
        for k in 0..ns {
            self.m
                .copy_from_slice(&self.state.now.mass[k * n..(k + 1) * n]);
            self.store_profiles(k, t);
        }
        if fresh {
            let mut heads = Vec::new();
            self.osmotic_heads_into(sys, &mut heads);
            self.state.osmotic_head = heads;
        }
        Ok(())
    }

    /// Advances every solute over the flow step just accepted by the stepper (`st` after
    /// the step, `info` its formula), with the flow evaluated at the new state in `sys`.
    pub fn advance(&mut self, sys: &mut System, st: &StepState, info: &StepInfo) -> Result<()> {
        let k = info.order;
        let alpha = &info.alpha;
        // The nodes of the step's formula must be this history's times.
        let flow_times = |j: usize| st.history.get(j).map(|h| h.t);
        let consistent = flow_times(0) == Some(self.state.now.t)
            && (2..=k).all(|j| {
                flow_times(j - 1).is_some()
                    && self.state.history.get(j - 2).map(|p| p.t) == flow_times(j - 1)
            });
        if !consistent {
            return Err(Error::Internal(format!(
                "solute history out of step with the flow at t = {:.6e} s (order {k})",
                st.t
            )));
        }
        self.load_flow(sys, &st.u);
        let n = self.n;
        let ns = self.count();
        let t_new = st.t;
        let c0 = alpha[0];
        for s in 0..ns {
            let range = s * n..(s + 1) * n;
            // History term w Σ_{j≥1} αj m_j, and the predictor (current masses).
            for i in 0..n {
                let mut h = alpha[1] * self.state.now.mass[s * n + i];
                for j in 2..=k {
                    h += alpha[j] * self.state.history[j - 2].mass[s * n + i];
                }
                self.hist[i] = self.widths[i] * h;
            }
            self.m.copy_from_slice(&self.state.now.mass[range.clone()]);
            self.solve_one(s, c0, t_new)?;
            let moved = clip_negative(&mut self.m, &self.widths);
            if moved > 0.0 {
                log::debug!(
                    "solute {}: {moved:.3e} g m-2 of negative mass moved to neighbouring cells at t = {:.6e} s",
                    self.solutes[s].name,
                    t_new
                );
            }
            self.next_mass[range].copy_from_slice(&self.m);
            self.store_profiles(s, t_new);
            // Cumulative flows by the same formula: α0 W_new + Σ αj W_j = F(new).
            let top = self.flux[s * (n + 1)];
            let bottom = self.flux[s * (n + 1) + n];
            let up = self.uptake_rate;
            let rates = [top, bottom, top.abs() + bottom.abs() + up.abs(), up];
            for (r, rate) in rates.iter().enumerate() {
                let idx = CUMULATIVE * s + r;
                let mut w = alpha[1] * self.state.now.cumulative[idx];
                for j in 2..=k {
                    w += alpha[j] * self.state.history[j - 2].cumulative[idx];
                }
                self.next_cumulative[idx] = (rate - w) / c0;
            }
        }
        // Shift the history (reusing the oldest point's buffers when full).
        let mut point = if self.state.history.len() >= MAX_HISTORY {
            self.state
                .history
                .pop()
                .unwrap_or_else(|| self.state.now.clone())
        } else {
            self.state.now.clone()
        };
        std::mem::swap(&mut point, &mut self.state.now);
        self.state.history.insert(0, point);
        self.state.now.t = t_new;
        self.state.now.mass.copy_from_slice(&self.next_mass);
        self.state
            .now
            .cumulative
            .copy_from_slice(&self.next_cumulative);
        Ok(())
    }

    /// The series values of every solute, [`SERIES_PER_SOLUTE`] each in the order of
    /// [`SERIES_FIELDS`], from the state and the last solve.
    pub fn series_values(&self) -> Vec<f64> {
        let n = self.n;
        let mut out = Vec::with_capacity(self.count() * SERIES_PER_SOLUTE);
        for (k, s) in self.solutes.iter().enumerate() {
            let mass = &self.state.now.mass[k * n..(k + 1) * n];
            let m0 = &self.state.initial_mass[k * n..(k + 1) * n];
            let storage: f64 = mass.iter().zip(&self.widths).map(|(m, w)| m * w).sum();
            let change: f64 = mass
                .iter()
                .zip(m0)
                .zip(&self.widths)
                .map(|((m, m0), w)| (m - m0) * w)
                .sum();
            let cum = &self.state.now.cumulative[CUMULATIVE * k..CUMULATIVE * (k + 1)];
            let error = change - (cum[0] - cum[1] - cum[3]);
            // Changes below a millionth of the stored mass are judged against that (a
            // closed column would otherwise divide round-off by round-off).
            let denom = change
                .abs()
                .max(cum[2].abs())
                .max(RELATIVE_FLOOR * storage.abs());
            let relative = if denom > 0.0 {
                error.abs() / denom
            } else {
                0.0
            };
            let conc = &self.conc[k * n..(k + 1) * n];
            let (peak_i, peak) =
                conc.iter()
                    .enumerate()
                    .fold(
                        (0, f64::NEG_INFINITY),
                        |a, (i, &c)| if c > a.1 { (i, c) } else { a },
                    );
            let recharge = match s.recharge_depth {
                Some(z) if self.mean_deposition[k].is_finite() => {
                    let c = crate::fit::compare::interpolate(&self.centers, conc, z);
                    if c > 0.0 {
                        self.mean_deposition[k] / c * 1.0e3 * SECONDS_PER_YEAR
                    } else {
                        f64::INFINITY
                    }
                }
                _ => f64::NAN,
            };
            out.extend_from_slice(&[
                storage,
                cum[0],
                cum[1],
                error,
                relative,
                self.centers[peak_i],
                peak,
                recharge,
                cum[3],
            ]);
        }
        out
    }

    /// The profiles of every solute at the state, with the flow evaluated at `u` in
    /// `sys` (as the snapshot shows it), into `out` (resized).
    pub fn profiles(&mut self, sys: &mut System, u: &[f64], out: &mut Vec<SoluteProfile>) {
        let n = self.n;
        let ns = self.count();
        out.resize(ns, SoluteProfile::default());
        self.load_flow(sys, u);
        let t = self.state.now.t;
        for k in 0..ns {
            let s = self.solutes[k].clone();
            self.m
                .copy_from_slice(&self.state.now.mass[k * n..(k + 1) * n]);
            self.concentrations(&s);
            let p = &mut out[k];
            p.concentration.clone_from(&self.c);
            p.flux.resize(n + 1, 0.0);
            self.face_fluxes_into(&s, t, &mut p.flux);
            p.precipitate.resize(n, 0.0);
            for i in 0..n {
                p.precipitate[i] = (self.m[i] - self.theta[i] * self.c[i]).max(0.0);
            }
            p.accumulation_age.resize(n, f64::NAN);
            let fd = self.mean_deposition[k];
            let mut above = 0.0;
            for i in 0..n {
                let half = 0.5 * self.widths[i] * self.m[i];
                p.accumulation_age[i] = if fd > 0.0 {
                    (above + half) / fd / SECONDS_PER_YEAR
                } else {
                    f64::NAN
                };
                above += 2.0 * half;
            }
        }
    }
}
