//! Residual and exact Jacobian of the three balance laws on the 1-D mesh.
//!
//! Unknowns per cell i (in this order): T [K], h [m], rv [kg m⁻³]. Equations per cell
//! (rows): 0 energy, 1 total water, 2 vapour. With storages M(u) per bulk volume and face
//! fluxes F (positive downward), the residual of a cell of width w is
//!
//! `R = w (c·M(u) − hist) + F_below − F_above`
//!
//! where the time integrator supplies `c` [s⁻¹] and `hist` (for backward Euler c = 1/Δt,
//! hist = M(u_old)/Δt). In equilibrium mode the vapour row is algebraic, `rv − rveq(T,h)`;
//! in kinetic mode it is the vapour balance with source `b (rveq − rv)`.

pub mod boundary;
pub mod cell;
mod derivs;
pub mod dual;
pub mod flux;
mod rules;

use crate::model::{
    BottomBc, Model, Periods, Physics, Soil, SurfaceBc, SurfaceWater, VaporMode, Vegetation,
};
use crate::props::constants::{T_REF, WATER_DENSITY, WATER_HEAT_CAPACITY};
use crate::solve::blocktri::{Block, BlockRows};
pub use crate::solve::problem::NonFinite;
pub use rules::{VariableRules, BLOCK};

/// The time stepper for the soil column (blocks of T, h, rv).
pub type ColumnStepper = crate::solve::stepper::Stepper<BLOCK>;

/// Balance errors of the column since the start, from the stepper's accumulators and
/// the last evaluation: ([energy J m⁻², water kg m⁻²] storage change − net inflow, the
/// same relative to max(|storage change|, throughput)).
pub fn column_balance(sys: &System, st: &ColumnStepper) -> ([f64; 2], [f64; 2]) {
    let (abs, rel) = st.balance(sys);
    ([abs[0], abs[1]], [rel[0], rel[1]])
}
use cell::{cell_props, CellProps, CellValues};
use derivs::{Derivs, Kept, Streamed};
use dual::{Dual, D0};
use flux::{face_flux, FaceFlux};

/// Index of the energy, water and vapour rows/storages within a cell.
pub const ENERGY: usize = 0;
pub const WATER: usize = 1;
pub const VAPOR: usize = 2;
/// Index of the unknowns within a cell.
pub const T: usize = 0;
pub const H: usize = 1;
pub const RV: usize = 2;

/// The discretised column: geometry, materials, boundary conditions and workspace.
#[derive(Debug, Clone)]
pub struct System {
    pub n: usize,
    pub widths: Vec<f64>,
    pub centers: Vec<f64>,
    pub faces_z: Vec<f64>,
    pub soils: Vec<Soil>,
    pub cell_soil: Vec<usize>,
    pub physics: Physics,
    pub surface: Periods<SurfaceBc>,
    pub bottom: Periods<BottomBc>,
    /// What the unknowns mean to the solvers: update limits, error measures and
    /// tolerances, step-change targets (see `rules`).
    pub rules: VariableRules,
    /// Values of the last evaluation (with or without derivatives): what is kept of the
    /// cell properties ([`CellValues`]), face fluxes and, per face, the total energy,
    /// water and vapour flux.
    pub cells: Vec<CellValues>,
    pub faces: Vec<FaceFlux<0>>,
    pub face_totals: Vec<[D0; BLOCK]>,
    /// The last evaluation with derivatives (the Jacobian's source): 3 slots per cell
    /// in kinetic mode, 2 in equilibrium mode (see `derivs`).
    d_full: Derivs<BLOCK, { 2 * BLOCK }, BLOCK>,
    d_reduced: Derivs<2, 4, 2>,
    /// Whether no evaluation with derivatives is kept (`[time] memory = "lean"`): the
    /// Jacobian is then evaluated afresh, cell by cell, and every value evaluation is
    /// direct (see `derivs::Streamed`).
    pub lean: bool,
    /// Whether the last evaluation left out the flux parts of linearised faces.
    parts_left_out: bool,
    /// Whether the flux parts are asked for at every step (solute transport): the kept
    /// evaluations then keep what faces read of their cells (see `derivs`), and the
    /// residual-only evaluations leave the whole cell records in `whole_cells` (else
    /// empty), valid when `whole_valid`.
    pub parts_each_step: bool,
    whole_cells: Vec<CellProps<0>>,
    whole_valid: bool,
    /// Osmotic head of the pore water in each cell [m] (empty: none; see
    /// [`cell::cell_props`]): set from the solutes before each step.
    pub osmotic_head: Vec<f64>,
    /// Plants by period (None: none).
    pub vegetation: Periods<Option<Vegetation>>,
    /// Whether any period has plants.
    pub has_vegetation: bool,
    /// Root water uptake of each cell from the last assembly [kg m⁻² s⁻¹ of column: the
    /// cell's sink times its width; empty without plants], and its total [energy W m⁻²,
    /// water kg m⁻² s⁻¹].
    pub uptake: Vec<f64>,
    pub uptake_totals: [f64; 2],
    /// Whether the top cell holds a surface store (ponded water; see
    /// [`System::pond_depth`]).
    pub surface_store: bool,
    /// Runoff from the surface store from the last assembly [energy W m⁻², water
    /// kg m⁻² s⁻¹].
    pub runoff: [f64; 2],
}

/// Time constant of the runoff above the largest ponding depth [s]: the excess leaves
/// at (P − Pmax)/τ, so the pond stands above its limit by about τ times the excess
/// inflow (1 s: 0.01 mm under 1 cm/s of excess) while the rate stays a smooth
/// function of the state that the implicit steps integrate exactly.
pub const RUNOFF_TIME: f64 = 1.0;
/// Width of the band above the largest ponding depth over which the runoff rate turns
/// on smoothly (quadratically) [m], so that its derivative has no jump.
pub const RUNOFF_BAND: f64 = 1.0e-3;

/// Width of the band over which the pond's storage turns on [m]: the pond depth is
/// x²/(2δ) for a surface head x in [0, δ] and x − δ/2 above, so that the top cell's
/// storage has no kink where the pond appears or vanishes (Newton then crosses it).
pub const POND_BAND: f64 = 1.0e-3;

/// Ponding depth [m] and its derivative for a hydrostatic surface head `x` [m].
#[inline]
pub fn pond_of_excess(x: f64) -> (f64, f64) {
    if x <= 0.0 {
        (0.0, 0.0)
    } else if x < POND_BAND {
        (x * x / (2.0 * POND_BAND), x / POND_BAND)
    } else {
        (x - 0.5 * POND_BAND, 1.0)
    }
}

/// The pond's turn-on weight w = dP/dx ∈ [0, 1] for a hydrostatic surface head `x` [m]
/// (the slope of [`pond_of_excess`]) and its derivative dw/dx [m⁻¹]: 0 below, x/δ within
/// the band δ, 1 above.
#[inline]
pub fn pond_weight(x: f64) -> (f64, f64) {
    if x <= 0.0 {
        (0.0, 0.0)
    } else if x < POND_BAND {
        (x / POND_BAND, 1.0 / POND_BAND)
    } else {
        (1.0, 0.0)
    }
}

/// Runoff rate per unit area [m s⁻¹] for a pond standing `x` [m] above its largest depth,
/// and its derivative [s⁻¹]: 0 below, x²/(2δτ) within the band δ, (x − δ/2)/τ above.
#[inline]
pub fn runoff_rate(x: f64) -> (f64, f64) {
    if x <= 0.0 {
        (0.0, 0.0)
    } else if x < RUNOFF_BAND {
        (
            x * x / (2.0 * RUNOFF_BAND * RUNOFF_TIME),
            x / (RUNOFF_BAND * RUNOFF_TIME),
        )
    } else {
        ((x - 0.5 * RUNOFF_BAND) / RUNOFF_TIME, 1.0 / RUNOFF_TIME)
    }
}

/// Whether every value is finite, in one branch-free pass (x·0 is 0 for finite x and
/// NaN for NaN or ±Inf).
#[inline]
fn all_finite(x: &[f64]) -> bool {
    x.iter().fold(0.0, |a: f64, v| a + v * 0.0) == 0.0
}

/// Magnitudes of the flux terms through one face: the scales of the energy and water
/// fluxes (at least the fluxes themselves), the vapour flux parts, and the operands whose
/// round-off the face contributes.
struct FaceMagnitudes {
    energy: f64,
    water: f64,
    vapor: f64,
    operands_energy: f64,
    operands_water: f64,
}

/// Fills the cell values, face fluxes and face totals of `sys` at state `u`, time `t`,
/// every cell and face evaluated directly (a face from the whole records of its two
/// cells, kept while needed).
fn evaluate_into(
    sys: &System,
    t: f64,
    u: &[f64],
    cells: &mut [CellValues],
    faces: &mut [FaceFlux<0>],
    totals: &mut [[D0; BLOCK]],
) {
    let n = sys.n;
    let mut above: CellProps<0> = sys.props_at(0, &u[..BLOCK]);
    cells[0] = above.kept_values();
    faces[0] = sys.top_face(t, &above);
    for j in 1..n {
        let below: CellProps<0> = sys.props_at(j, &u[BLOCK * j..BLOCK * j + BLOCK]);
        cells[j] = below.kept_values();
        faces[j] = sys.interior_face(&above, &below, j);
        above = below;
    }
    faces[n] = sys.bottom_face(t, &above);
    for (tot, f) in totals.iter_mut().zip(faces.iter()) {
        *tot = f.totals();
    }
}

impl System {
    pub fn new(model: &Model) -> System {
        let m = &model.mesh;
        let n = m.n_cells();
        let zero: CellProps<0> = cell_props(
            &model.soils[model.cell_soil[0]],
            &model.physics,
            D0::cst(293.15),
            D0::cst(-1.0),
            D0::cst(0.01),
            0.0,
            0.0,
        );
        System {
            n,
            widths: m.widths.clone(),
            centers: m.centers.clone(),
            faces_z: m.faces.clone(),
            soils: model.soils.clone(),
            cell_soil: model.cell_soil.clone(),
            physics: model.physics.clone(),
            surface: model.surface.clone(),
            bottom: model.bottom.clone(),
            rules: VariableRules::for_model(model),
            cells: vec![zero.kept_values(); n],
            faces: vec![FaceFlux::zero(); n + 1],
            face_totals: vec![[D0::cst(0.0); BLOCK]; n + 1],
            d_full: Derivs::default(),
            d_reduced: Derivs::default(),
            lean: model.time.lean_memory,
            parts_left_out: false,
            parts_each_step: !model.solutes.is_empty(),
            whole_cells: if model.solutes.is_empty() {
                Vec::new()
            } else {
                vec![zero; n]
            },
            whole_valid: false,
            osmotic_head: Vec::new(),
            has_vegetation: model.has_plants(),
            vegetation: model.vegetation.clone(),
            uptake: if model.has_plants() {
                vec![0.0; n]
            } else {
                Vec::new()
            },
            uptake_totals: [0.0; 2],
            surface_store: model.has_surface_store(),
            runoff: [0.0; 2],
        }
    }

    /// The fluxes through interior face `j` (between cells j − 1 and j) from the records
    /// `up`, `lo` of those cells with N slots each: the face's derivatives with respect
    /// to the cell above in slots 0..N and to the cell below in N..2N.
    #[inline(always)]
    pub(super) fn interior_face<const N: usize, const M: usize>(
        &self,
        up: &CellProps<N>,
        lo: &CellProps<N>,
        j: usize,
    ) -> FaceFlux<M> {
        face_flux(
            up,
            lo,
            0,
            N,
            self.d_below(j - 1),
            self.d_above(j),
            self.physics.face_conductivity,
        )
    }

    /// Distance from the centre of cell `i` to its upper face [m].
    #[inline(always)]
    pub fn d_above(&self, i: usize) -> f64 {
        self.centers[i] - self.faces_z[i]
    }

    /// Distance from the centre of cell `i` to its lower face [m].
    #[inline(always)]
    pub fn d_below(&self, i: usize) -> f64 {
        self.faces_z[i + 1] - self.centers[i]
    }

    /// Number of unknowns (3 per cell).
    pub fn len(&self) -> usize {
        BLOCK * self.n
    }
    pub fn is_empty(&self) -> bool {
        self.n == 0
    }

    pub fn soil_of(&self, cell: usize) -> &Soil {
        &self.soils[self.cell_soil[cell]]
    }

    /// The properties of cell `i` at its unknowns `x` (T, h, rv) with `N` derivative
    /// slots (T, h and, for N = 3, rv).
    #[inline]
    fn props_at<const N: usize>(&self, i: usize, x: &[f64]) -> CellProps<N> {
        let mut c = cell_props(
            self.soil_of(i),
            &self.physics,
            Dual::var(x[T], 0),
            Dual::var(x[H], 1),
            Dual::var(x[RV], 2),
            self.osmotic_head.get(i).copied().unwrap_or(0.0),
            if self.physics.cell_average_retention {
                self.widths[i]
            } else {
                0.0
            },
        );
        if i == 0 && self.surface_store && x[H] > self.d_above(0) {
            // The pond: water standing on the surface, in hydrostatic equilibrium with
            // the top cell's centre, at the cell's temperature.
            let (p, dp) = pond_of_excess(x[H] - self.d_above(0));
            let p = c.h.chain(p, dp);
            let per_width = 1.0 / self.widths[0];
            c.water = c.water + p * (WATER_DENSITY * per_width);
            c.energy =
                c.energy + p * (c.t - T_REF) * (WATER_DENSITY * WATER_HEAT_CAPACITY * per_width);
        }
        c
    }

    /// Depth of the water ponded on the surface [m] at top-cell head `h0` [m]: with a
    /// surface store, the head the surface has when the top half-cell is hydrostatic,
    /// h0 − (depth of the top cell's centre), where that is positive; 0 otherwise. The
    /// pond is part of the top cell's storage (water and energy, at the cell's
    /// temperature), so the balances and the time integration carry it like any stored
    /// water: it fills when more water reaches the surface than the soil takes,
    /// infiltrates later, and runs off above the largest ponding depth.
    pub fn pond_depth(&self, h0: f64) -> f64 {
        if self.surface_store {
            pond_of_excess(h0 - self.d_above(0)).0
        } else {
            0.0
        }
    }

    /// The largest ponding depth of the surface period in force at `t` [m] (None: no
    /// runoff: a surface without store, a store without limit, or a period of another
    /// kind, whose pond stays).
    fn max_pond_depth(&self, t: f64) -> Option<f64> {
        // The period in force just before `t`, as for the boundary fluxes.
        match &self.surface.at(t.next_down()).water {
            SurfaceWater::Pond { max_depth, .. } => *max_depth,
            _ => None,
        }
    }

    /// Runoff at `t` from the top cell's last evaluation: the water flow ρw R(P) [kg m⁻²
    /// s⁻¹], its derivative with respect to the top cell's head, and the enthalpy per kg
    /// it carries [J kg⁻¹]; None when nothing runs off.
    fn runoff_terms(&self, t: f64) -> Option<(f64, f64, f64)> {
        let pmax = self.max_pond_depth(t)?;
        let c0 = &self.cells[0];
        let (p, dp) = pond_of_excess(c0.h.v - self.d_above(0));
        let (r, dr) = runoff_rate(p - pmax);
        if r == 0.0 && dr == 0.0 {
            return None;
        }
        let enthalpy = WATER_HEAT_CAPACITY * (c0.t.v - T_REF);
        // dR/dh0 = R'(P − Pmax) · dP/dh0 (dP/dh0 < 1 within the pond's turn-on band).
        Some((WATER_DENSITY * r, WATER_DENSITY * dr * dp, enthalpy))
    }

    /// Runoff at `t` into `self.runoff`, and added to the top cell's water and energy rows.
    fn add_runoff(&mut self, t: f64, res: &mut [f64]) {
        self.runoff = [0.0; 2];
        if let Some((w, _, enthalpy)) = self.runoff_terms(t) {
            self.runoff = [w * enthalpy, w];
            res[WATER] += w;
            res[ENERGY] += w * enthalpy;
        }
    }

    /// The derivatives of the root uptake (with `plants`, as [`System::plants`] at the
    /// step's time) and runoff (`runoff`, as [`System::runoff_terms`]; top cell only)
    /// terms of cell `i` with respect to its own T and h, added to its diagonal block.
    #[inline]
    fn add_source_jacobian(
        &self,
        i: usize,
        plants: Option<(&Vegetation, f64)>,
        runoff: Option<(f64, f64, f64)>,
        d: &mut Block<BLOCK>,
    ) {
        if let Some((veg, tp)) = plants {
            let cell = &self.cells[i];
            let (alpha, dalpha) = veg.stress(cell.h.v);
            let k = WATER_DENSITY * tp * veg.root_fraction[i];
            if k != 0.0 {
                let enthalpy = WATER_HEAT_CAPACITY * (cell.t.v - T_REF);
                d[WATER][H] += k * dalpha;
                d[ENERGY][H] += k * dalpha * enthalpy;
                d[ENERGY][T] += k * alpha * WATER_HEAT_CAPACITY;
            }
        }
        if let (0, Some((w, dw, enthalpy))) = (i, runoff) {
            d[WATER][H] += dw;
            d[ENERGY][H] += dw * enthalpy;
            d[ENERGY][T] += w * WATER_HEAT_CAPACITY;
        }
    }

    /// Sets the osmotic head of every cell [m] (≤ 0; empty: none) and drops the kept
    /// evaluations made with the old ones.
    pub fn set_osmotic_heads(&mut self, heads: &[f64]) {
        self.osmotic_head.clear();
        self.osmotic_head.extend_from_slice(heads);
        self.forget_linearization();
    }

    /// The heap arrays of the system and of its kept evaluations (see [`crate::memory`]).
    pub fn arrays(&self, out: &mut Vec<crate::memory::ArrayCost>) {
        use crate::memory::push;
        const OWNER: &str = "system";
        push(out, OWNER, "cell values", &self.cells);
        push(
            out,
            OWNER,
            "whole cell records (solute runs)",
            &self.whole_cells,
        );
        push(out, OWNER, "face values", &self.faces);
        push(out, OWNER, "face totals", &self.face_totals);
        push(out, OWNER, "widths", &self.widths);
        push(out, OWNER, "centres", &self.centers);
        push(out, OWNER, "face depths", &self.faces_z);
        push(out, OWNER, "cell soils", &self.cell_soil);
        push(out, OWNER, "osmotic heads", &self.osmotic_head);
        push(out, OWNER, "root uptake", &self.uptake);
        self.d_full.arrays(out);
        self.d_reduced.arrays(out);
    }

    /// Drops the evaluations with derivatives kept as bases of linearised evaluations:
    /// the next evaluations compute every cell and face directly.
    pub fn forget_linearization(&mut self) {
        self.d_full.forget();
        self.d_reduced.forget();
    }

    /// The states at which the kept evaluations with derivatives were made (see
    /// [`System::evaluate`]): of the cells (3 per cell) and of the interior faces (6 per
    /// face, the unknowns of the cells above and below); NaN where there is none. With
    /// [`System::restore_linearization`] they restore those evaluations exactly.
    pub fn linearization_states(&self) -> (&[f64], &[f64]) {
        self.kept().bases()
    }

    /// Re-evaluates the kept evaluations with derivatives at the given states (as from
    /// [`System::linearization_states`]; empty or mis-sized: none kept).
    pub fn restore_linearization(&mut self, cells: &[f64], faces: &[f64]) {
        self.forget_linearization();
        self.with_kept_mut(|d, sys| d.restore(sys, cells, faces));
    }

    /// Whether the vapour unknown is algebraic (equilibrium mode): the evaluations with
    /// derivatives then carry 2 slots per cell (T, h), not 3.
    fn reduced(&self) -> bool {
        matches!(self.physics.vapor_mode, VaporMode::Equilibrium)
    }

    /// The kept evaluations with derivatives of this system's vapour mode.
    fn kept(&self) -> &dyn Kept {
        const STREAMED_FULL: Streamed<BLOCK, { 2 * BLOCK }, BLOCK> = Streamed;
        const STREAMED_REDUCED: Streamed<2, 4, 2> = Streamed;
        if self.lean {
            if self.reduced() {
                &STREAMED_REDUCED
            } else {
                &STREAMED_FULL
            }
        } else if self.reduced() {
            &self.d_reduced
        } else {
            &self.d_full
        }
    }

    /// Runs `f` on the kept evaluations, taken out of the system for the call (so that
    /// `f` may also change the system).
    fn with_kept_mut<R>(&mut self, f: impl FnOnce(&mut dyn Kept, &mut System) -> R) -> R {
        if self.lean {
            if self.reduced() {
                f(&mut Streamed::<2, 4, 2>, self)
            } else {
                f(&mut Streamed::<BLOCK, { 2 * BLOCK }, BLOCK>, self)
            }
        } else if self.reduced() {
            let mut d = std::mem::take(&mut self.d_reduced);
            let r = f(&mut d, self);
            self.d_reduced = d;
            r
        } else {
            let mut d = std::mem::take(&mut self.d_full);
            let r = f(&mut d, self);
            self.d_full = d;
            r
        }
    }

    /// Evaluates cell properties and all face fluxes (values only) at state `u` and
    /// time `t` [s].
    ///
    /// The evaluations with derivatives (the Jacobian's) are kept per cell and per face
    /// with the state they were made at (see `derivs::Derivs`): a face whose two cells
    /// lie within 1e-7 relative of its kept state (head: relative to max(|h|, 0.01 m))
    /// takes its total fluxes by linearisation, value + derivatives · change, and a cell
    /// that lies that near its kept state, and both of whose faces do, the properties
    /// its own rows read (storages, rveq, liquid content) likewise (its faces' flux
    /// parts, which only the results and the solutes read, are evaluated from the cell
    /// values: the kept face records hold no derivatives of them). The error is of
    /// second order in the change, ~1e-16 relative times the square of the laws' slopes
    /// in log–log terms (about 18 for the saturation pressure in T, a few for the Mualem
    /// conductivity in h): at most ~2e-12 of the terms, 500 times below the Newton
    /// tolerance (`tests/jacobian.rs` checks 1e-11). Cells away from a
    /// moving front mostly qualify (on the benchmark case, measured before a cell also
    /// needed both its faces kept: three quarters of the cell
    /// evaluations of the residual-only Newton iterations, and 43 % of those of the
    /// Jacobian evaluations, which keep them). Boundary faces are always evaluated
    /// directly.
    pub fn evaluate(&mut self, t: f64, u: &[f64]) {
        self.evaluate_values(t, u, true, true);
    }

    /// Evaluates every cell and face directly (values only, no linearisation), as a
    /// system without kept evaluations would: what the results file shows of a state.
    pub fn evaluate_direct(&mut self, t: f64, u: &[f64]) {
        self.evaluate_values(t, u, true, false);
    }

    /// [`System::evaluate`] (`linearise`) or [`System::evaluate_direct`]; without
    /// `parts`, the flux parts of linearised faces are left out (the residual needs the
    /// totals only) until [`System::complete_face_parts`].
    fn evaluate_values(&mut self, t: f64, u: &[f64], parts: bool, linearise: bool) {
        let mut cells = std::mem::take(&mut self.cells);
        let mut whole = std::mem::take(&mut self.whole_cells);
        let mut faces = std::mem::take(&mut self.faces);
        let mut totals = std::mem::take(&mut self.face_totals);
        let done = linearise
            && self.kept().linearised(
                self,
                t,
                u,
                &mut cells,
                &mut whole,
                &mut faces,
                &mut totals,
                parts,
            );
        if !done {
            evaluate_into(self, t, u, &mut cells, &mut faces, &mut totals);
        }
        self.parts_left_out = done && !parts;
        self.whole_valid = done && !whole.is_empty();
        self.whole_cells = whole;
        self.cells = cells;
        self.faces = faces;
        self.face_totals = totals;
    }

    /// Completes the last evaluation, made at `u` by [`System::assemble`] without the
    /// Jacobian, with the flux parts it left out, so that everything read from the
    /// system (fluxes by mechanism, for the results) belongs to `u`.
    pub fn complete_face_parts(&mut self, u: &[f64]) {
        if !self.parts_left_out {
            return;
        }
        let mut faces = std::mem::take(&mut self.faces);
        let whole = self.whole_valid.then_some(&self.whole_cells[..]);
        self.kept().complete_parts(self, u, whole, &mut faces);
        self.faces = faces;
        self.parts_left_out = false;
    }

    /// As [`System::evaluate`], with the derivatives the Jacobian needs; the values are
    /// copied to the value workspace, so both agree bitwise (a face that keeps its base
    /// gets its flux parts at the base until [`System::complete_face_parts`]).
    pub fn evaluate_with_derivatives(&mut self, t: f64, u: &[f64]) {
        self.parts_left_out = self.with_kept_mut(|d, sys| d.evaluate(sys, t, u));
        self.whole_valid = false;
    }

    /// Storage per bulk volume of cell i: [energy J m⁻³, water kg m⁻³, vapour kg m⁻³],
    /// from the last evaluation.
    pub fn storage(&self, i: usize) -> [f64; BLOCK] {
        let c = &self.cells[i];
        [c.energy.v, c.water.v, c.vapor.v]
    }

    /// Storage of every cell into `out` (3 per cell), from the last evaluation.
    pub fn storage_into(&self, out: &mut [f64]) {
        for i in 0..self.n {
            out[BLOCK * i..BLOCK * i + BLOCK].copy_from_slice(&self.storage(i));
        }
    }

    /// Column totals per unit area from the last evaluation: [energy J m⁻², water kg m⁻²].
    pub fn totals(&self) -> [f64; 2] {
        let mut e = 0.0;
        let mut w = 0.0;
        for i in 0..self.n {
            e += self.widths[i] * self.cells[i].energy.v;
            w += self.widths[i] * self.cells[i].water.v;
        }
        [e, w]
    }

    /// Energy and water fluxes through the land surface and the bottom boundary from the
    /// last evaluation, positive downward: ([energy W m⁻², water kg m⁻² s⁻¹] at the top,
    /// the same at the bottom).
    pub fn boundary_fluxes(&self) -> ([f64; 2], [f64; 2]) {
        let top = &self.face_totals[0];
        let bot = &self.face_totals[self.n];
        ([top[ENERGY].v, top[WATER].v], [bot[ENERGY].v, bot[WATER].v])
    }

    /// Magnitudes of the flux terms through face `j` from the last evaluation.
    #[inline]
    fn face_magnitudes(&self, j: usize) -> FaceMagnitudes {
        let f = &self.faces[j];
        let t = &self.face_totals[j];
        FaceMagnitudes {
            energy: f.scale_energy.max(t[ENERGY].v.abs()),
            water: f.scale_water.max(t[WATER].v.abs()),
            vapor: f.vapor_iso.v.abs() + f.vapor_th.v.abs(),
            operands_energy: f.operands_energy,
            operands_water: f.operands_water,
        }
    }

    /// Magnitude of the terms of the rows of cell `i` from the last evaluation (storage
    /// terms plus the flux magnitudes `fa`, `fb` of its upper and lower face), and their
    /// round-off floors (16 ε times the operands of the storage terms and of both faces'
    /// fluxes): [energy, water, vapour].
    #[inline]
    fn row_terms(
        &self,
        i: usize,
        c: f64,
        hist: &[f64],
        fa: &FaceMagnitudes,
        fb: &FaceMagnitudes,
        rate: Option<f64>,
    ) -> ([f64; BLOCK], [f64; BLOCK]) {
        const K: f64 = 16.0 * f64::EPSILON;
        let w = self.widths[i];
        let cp = &self.cells[i];
        let store_e = w * ((c * cp.energy.v).abs() + hist[BLOCK * i + ENERGY].abs());
        let store_w = w * ((c * cp.water.v).abs() + hist[BLOCK * i + WATER].abs())
            + self.uptake.get(i).map_or(0.0, |u| u.abs())
            + if i == 0 { self.runoff[1].abs() } else { 0.0 };
        let vapor_algebraic = cp.rv.v.abs() + cp.rveq.v.abs();
        let vapor_scale = match rate {
            Some(b) => {
                w * ((c * cp.vapor.v).abs() + hist[BLOCK * i + VAPOR].abs() + b * vapor_algebraic)
                    + fa.vapor
                    + fb.vapor
            }
            None => vapor_algebraic,
        };
        (
            [
                store_e + fa.energy + fb.energy,
                store_w + fa.water + fb.water,
                vapor_scale + 1e-300,
            ],
            [
                K * (store_e + fa.operands_energy + fb.operands_energy),
                K * (store_w + fa.operands_water + fb.operands_water),
                K * vapor_algebraic,
            ],
        )
    }

    /// The kinetic phase-change rate, or None in equilibrium mode.
    fn kinetic_rate(&self) -> Option<f64> {
        match self.physics.vapor_mode {
            VaporMode::Kinetic { rate } => Some(rate),
            VaporMode::Equilibrium => None,
        }
    }

    /// Row terms and floors of every cell, each face's magnitudes computed once.
    #[inline]
    fn for_each_row_terms(
        &self,
        c: f64,
        hist: &[f64],
        mut f: impl FnMut(usize, [f64; BLOCK], [f64; BLOCK]),
    ) {
        let rate = self.kinetic_rate();
        let mut fa = self.face_magnitudes(0);
        for i in 0..self.n {
            let fb = self.face_magnitudes(i + 1);
            let (s, fl) = self.row_terms(i, c, hist, &fa, &fb, rate);
            f(i, s, fl);
            fa = fb;
        }
    }

    /// Magnitude of the terms of every residual row (3 per cell) from the last evaluation:
    /// storage terms plus the flux scales of both faces. Newton judges convergence by
    /// |R| against this, so round-off in large cancelling terms is not mistaken for error.
    pub fn residual_scale_into(&self, c: f64, hist: &[f64], out: &mut [f64]) {
        self.for_each_row_terms(c, hist, |i, s, _| {
            out[BLOCK * i..BLOCK * i + BLOCK].copy_from_slice(&s)
        });
    }

    /// What Newton's convergence test needs from the last evaluation, in one pass: per
    /// row, the scale against which `tol` is applied (the terms' magnitude, or the
    /// round-off floor / `tol` where that is larger, so that a row converges at its
    /// floor), into `scale`; and for the balance test, per conserved quantity [energy,
    /// water], the round-off floors summed over the column and what the cells' storages
    /// move, Σ w |c M − hist|.
    pub fn convergence_scales_into(
        &self,
        c: f64,
        hist: &[f64],
        tol: f64,
        scale: &mut [f64],
    ) -> ([f64; 2], [f64; 2]) {
        let inv_tol = 1.0 / tol;
        let mut floor_sum = [0.0; 2];
        let mut moved = [0.0; 2];
        self.for_each_row_terms(c, hist, |i, s, f| {
            for r in 0..BLOCK {
                scale[BLOCK * i + r] = s[r].max(f[r] * inv_tol);
            }
            let w = self.widths[i];
            let cp = &self.cells[i];
            floor_sum[0] += f[ENERGY];
            floor_sum[1] += f[WATER];
            moved[0] += w * (c * cp.energy.v - hist[BLOCK * i + ENERGY]).abs();
            moved[1] += w * (c * cp.water.v - hist[BLOCK * i + WATER]).abs();
        });
        (floor_sum, moved)
    }

    /// Derivative of the storage terms `w·M(u)` of each cell with respect to its own
    /// unknowns (3×3 row-major block per cell), from the last evaluation with
    /// derivatives: the part of the Jacobian that scales with the integrator coefficient
    /// `c`, so a Jacobian built at `c` becomes the one at `c'` by adding `(c' − c)` times
    /// these blocks. The algebraic vapour row of equilibrium mode has no storage part.
    pub fn storage_jacobian_into(&self, out: &mut dyn BlockRows<BLOCK>) {
        self.kept().storage_blocks_into(self, out);
    }

    /// The plants in force for a step ending at `t` (the period of its left limit, so a
    /// step ending on a change of period belongs to the period before).
    /// With the plants, their potential transpiration at that left limit [m s⁻¹].
    #[inline]
    pub fn plants(&self, t: f64) -> Option<(&Vegetation, f64)> {
        let before = t.next_down();
        self.vegetation
            .at(before)
            .as_ref()
            .map(|v| (v, v.transpiration.value(before).max(0.0)))
    }

    /// Root water uptake at time `t` from the cell values of the last evaluation into
    /// `self.uptake` and `self.uptake_totals` (sink per cell, Feddes-reduced potential
    /// transpiration times the cell's root fraction, in kg m⁻² s⁻¹; it carries the
    /// liquid enthalpy ρw cw (T − T0) per m³ out of the energy balance).
    pub fn compute_uptake(&mut self, t: f64) {
        let mut totals = [0.0; 2];
        let mut uptake = std::mem::take(&mut self.uptake);
        match self.plants(t) {
            None => uptake.iter_mut().for_each(|u| *u = 0.0),
            Some((veg, tp)) => {
                for (i, u) in uptake.iter_mut().enumerate() {
                    let (alpha, _) = veg.stress(self.cells[i].h.v);
                    let s = WATER_DENSITY * tp * alpha * veg.root_fraction[i];
                    *u = s;
                    totals[1] += s;
                    totals[0] += s * WATER_HEAT_CAPACITY * (self.cells[i].t.v - T_REF);
                }
            }
        }
        self.uptake = uptake;
        self.uptake_totals = totals;
    }

    /// Adds the root water uptake at `t` to the water and energy rows of the residual.
    fn add_uptake(&mut self, t: f64, res: &mut [f64]) {
        self.compute_uptake(t);
        for i in 0..self.n {
            let s = self.uptake[i];
            if s != 0.0 {
                res[BLOCK * i + WATER] += s;
                res[BLOCK * i + ENERGY] += s * WATER_HEAT_CAPACITY * (self.cells[i].t.v - T_REF);
            }
        }
    }

    /// Fills the residual (and, when given, the Jacobian) at state `u`, time `t`, with
    /// integrator coefficient `c` and history `hist` (3 per cell).
    pub fn assemble(
        &mut self,
        t: f64,
        u: &[f64],
        c: f64,
        hist: &[f64],
        res: &mut [f64],
        jac: Option<&mut dyn BlockRows<BLOCK>>,
    ) -> Result<(), NonFinite> {
        match jac {
            Some(jac) => self.assemble_full(t, u, c, hist, res, Some((jac, None))),
            None => self.assemble_full(t, u, c, hist, res, None),
        }
    }

    /// [`System::assemble`], with the Jacobian and, when given, the storage-derivative
    /// blocks too (those of [`System::storage_jacobian_into`], bitwise; the lean mode
    /// evaluates them in the Jacobian's pass instead of another).
    #[allow(clippy::too_many_arguments, clippy::type_complexity)]
    pub fn assemble_full(
        &mut self,
        t: f64,
        u: &[f64],
        c: f64,
        hist: &[f64],
        res: &mut [f64],
        jac: Option<(&mut dyn BlockRows<BLOCK>, Option<&mut dyn BlockRows<BLOCK>>)>,
    ) -> Result<(), NonFinite> {
        if jac.is_some() {
            self.evaluate_with_derivatives(t, u);
        } else {
            // The residual needs the face totals, not the flux parts.
            self.evaluate_values(t, u, false, true);
        }
        let n = self.n;
        let kinetic = self.kinetic_rate();
        // Storage and source terms (cell-local).
        for i in 0..n {
            let w = self.widths[i];
            let cp = &self.cells[i];
            let local: [D0; BLOCK] = [
                (cp.energy * c - hist[BLOCK * i + ENERGY]) * w,
                (cp.water * c - hist[BLOCK * i + WATER]) * w,
                match kinetic {
                    // In equilibrium the physics uses rveq itself; this row makes the
                    // vapour unknown follow it.
                    None => D0::cst(u[BLOCK * i + RV]) - cp.rveq,
                    Some(b) => {
                        (cp.vapor * c - hist[BLOCK * i + VAPOR]) * w - (cp.rveq - cp.rv) * (b * w)
                    }
                },
            ];
            for r in 0..BLOCK {
                res[BLOCK * i + r] = local[r].v;
            }
        }
        // Flux differences.
        for j in 0..=n {
            let [fe, fw, fv] = self.face_totals[j];
            if j >= 1 {
                res[BLOCK * (j - 1) + ENERGY] += fe.v;
                res[BLOCK * (j - 1) + WATER] += fw.v;
                if kinetic.is_some() {
                    res[BLOCK * (j - 1) + VAPOR] += fv.v;
                }
            }
            if j < n {
                res[BLOCK * j + ENERGY] -= fe.v;
                res[BLOCK * j + WATER] -= fw.v;
                if kinetic.is_some() {
                    res[BLOCK * j + VAPOR] -= fv.v;
                }
            }
        }
        if self.has_vegetation {
            self.add_uptake(t, res);
        }
        if self.surface_store {
            // (Its Jacobian entries are added below, after the flux blocks.)
            self.add_runoff(t, res);
        }
        if !all_finite(&res[..BLOCK * n]) {
            let k = res.iter().position(|r| !r.is_finite()).unwrap_or(0);
            return Err(NonFinite {
                cell: k / BLOCK,
                row: k % BLOCK,
            });
        }
        if let Some((jac, storage)) = jac {
            // With the uptake and runoff terms (their Jacobian entries added after the
            // flux blocks'), row by row.
            let plants = if self.has_vegetation {
                self.plants(t)
            } else {
                None
            };
            let runoff = if self.surface_store {
                self.runoff_terms(t)
            } else {
                None
            };
            let sources =
                |i: usize, d: &mut Block<BLOCK>| self.add_source_jacobian(i, plants, runoff, d);
            let any = plants.is_some() || runoff.is_some();
            self.kept()
                .jacobian_into(self, t, u, c, jac, any.then_some(&sources), storage)?;
        }
        Ok(())
    }
}
