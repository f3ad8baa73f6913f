//! The soil column as a [`Problem`] for Newton's method and the time stepper, with every
//! rule that depends on what the unknowns mean: how far Newton may move temperature,
//! head and vapour density per iteration, when they have stopped moving, how their local
//! error is measured (moisture in liquid content, head only where the soil is saturated),
//! and backward Euler's change targets.

use super::{System, ENERGY, H, RV, T, WATER};
use crate::model::Model;
use crate::props::constants::WATER_DENSITY;
use crate::solve::blocktri::BlockRows;
use crate::solve::problem::{BalanceScales, Conserved, ErrorTest, NonFinite, Problem};

/// Unknowns per cell: T [K], h [m], rv [kg m⁻³].
pub const BLOCK: usize = 3;

/// How far below its saturation head a saturated cell may go in one Newton iteration
/// [m] (see `apply_update`).
const DESATURATION_STEP: f64 = 1.0e-3;

/// The per-variable rules of the solvers for the soil column.
#[derive(Debug, Clone, PartialEq)]
pub struct VariableRules {
    /// Largest change per Newton iteration: temperature [K]; head by a factor in |h|
    /// [-] plus an absolute margin [m] (dry soil spans decades of suction).
    pub max_temperature_update: f64,
    pub max_head_factor: f64,
    pub max_head_update: f64,
    /// Below these updates the unknowns have stopped moving (Newton then accepts the
    /// looser residual tolerance): temperature [K], head relative [-] with an absolute
    /// floor [m], vapour density relative [-] with floor [kg m⁻³].
    pub still_temperature: f64,
    pub still_head_rel: f64,
    pub still_head_abs: f64,
    pub still_vapor_rel: f64,
    pub still_vapor_abs: f64,
    /// Absolute local-error tolerances: temperature [K], head [m] (where saturated),
    /// vapour density [kg m⁻³], liquid content [m³ m⁻³] (elsewhere).
    pub atol_temperature: f64,
    pub atol_head: f64,
    pub atol_vapor: f64,
    pub atol_liquid_content: f64,
    /// Backward Euler: target largest temperature [K] and liquid-content [m³ m⁻³]
    /// change per step.
    pub target_temperature_change: f64,
    pub target_liquid_content_change: f64,
}

impl VariableRules {
    /// The rules with the case's local-error tolerances.
    pub fn for_model(model: &Model) -> Self {
        let t = &model.time;
        VariableRules {
            max_temperature_update: 5.0,
            max_head_factor: 10.0,
            max_head_update: 2.0,
            still_temperature: 1e-9,
            still_head_rel: 1e-10,
            still_head_abs: 1e-9,
            still_vapor_rel: 1e-10,
            still_vapor_abs: 1e-16,
            atol_temperature: t.atol_temperature,
            atol_head: t.atol_head,
            atol_vapor: t.atol_vapor,
            atol_liquid_content: t.atol_theta,
            target_temperature_change: 0.5,
            target_liquid_content_change: 0.02,
        }
    }
}

/// Energy and water are conserved; the vapour row is not a separate balance (its
/// storage is part of the water row's).
const CONSERVED_ROWS: [usize; 2] = [ENERGY, WATER];

impl Problem<BLOCK> for System {
    fn blocks(&self) -> usize {
        self.n
    }

    fn volumes(&self) -> &[f64] {
        &self.widths
    }

    fn conserved_rows(&self) -> &[usize] {
        &CONSERVED_ROWS
    }

    fn evaluate(&mut self, t: f64, u: &[f64]) {
        System::evaluate(self, t, u);
    }

    #[inline]
    fn storage(&self, i: usize) -> [f64; BLOCK] {
        System::storage(self, i)
    }

    fn boundary_flows(&self) -> (Conserved, Conserved) {
        let (top, bot) = self.boundary_fluxes();
        ([top[0], top[1], 0.0, 0.0], [bot[0], bot[1], 0.0, 0.0])
    }

    fn sink_flows(&self) -> Conserved {
        let u = &self.uptake_totals;
        [u[0], u[1], 0.0, 0.0]
    }

    fn runoff_flows(&self) -> Conserved {
        [self.runoff[0], self.runoff[1], 0.0, 0.0]
    }

    fn assemble(
        &mut self,
        t: f64,
        u: &[f64],
        c: f64,
        hist: &[f64],
        res: &mut [f64],
        jac: Option<&mut dyn BlockRows<BLOCK>>,
    ) -> Result<(), NonFinite> {
        System::assemble(self, t, u, c, hist, res, jac)
    }

    fn last_unknown_decoupled(&self) -> bool {
        // In equilibrium mode the vapour row is rv − rveq(T, h) and nothing depends on rv.
        self.kinetic_rate().is_none()
    }

    fn lean_memory(&self) -> bool {
        self.lean
    }

    fn storage_jacobian_into(&self, out: &mut dyn BlockRows<BLOCK>) {
        System::storage_jacobian_into(self, out);
    }

    fn assemble_with_storage(
        &mut self,
        t: f64,
        u: &[f64],
        c: f64,
        hist: &[f64],
        res: &mut [f64],
        jac: &mut dyn BlockRows<BLOCK>,
        storage: &mut dyn BlockRows<BLOCK>,
    ) -> Result<(), NonFinite> {
        System::assemble_full(self, t, u, c, hist, res, Some((jac, Some(storage))))
    }

    fn convergence_scales_into(
        &self,
        c: f64,
        hist: &[f64],
        tol: f64,
        scale: &mut [f64],
    ) -> BalanceScales {
        let (floor, moved) = System::convergence_scales_into(self, c, hist, tol, scale);
        BalanceScales {
            floor: [floor[0], floor[1], 0.0, 0.0],
            moved: [moved[0], moved[1], 0.0, 0.0],
        }
    }

    fn column_scales_into(&self, u: &[f64], col: &mut [f64]) {
        for (c, x) in col.chunks_exact_mut(BLOCK).zip(u.chunks_exact(BLOCK)) {
            c[T] = 1.0;
            c[H] = 1.0 + x[H].abs();
            c[RV] = 1e-3 + x[RV].abs();
        }
    }

    fn apply_update(&self, u: &mut [f64], dx: &mut [f64], col: &[f64]) -> bool {
        let r = &self.rules;
        let mut small = true;
        let shrink = 1.0 / r.max_head_factor;
        let n = u.len() / BLOCK;
        let unsaturated = |j: usize, hj: f64| hj < self.soil_of(j).retention.saturation_head();
        // Head of the cell above before this iteration (the loop goes downward).
        let mut old_above = f64::NAN;
        for i in 0..n {
            let k = BLOCK * i;
            let d = [dx[k + T], dx[k + H], dx[k + RV]];
            let c = &col[k..k + BLOCK];
            let dt = (d[T] * c[T]).clamp(-r.max_temperature_update, r.max_temperature_update);
            // Heads move at most by the factor `max_head_factor` per iteration in |h|
            // (dry soil spans decades), plus `max_head_update` near saturation.
            let h = u[k + H];
            let lo = h.min(0.0) * r.max_head_factor - r.max_head_update;
            let hi = if h < 0.0 { h * shrink } else { h } + r.max_head_update;
            let mut dh = (d[H] * c[H]).clamp(lo - h, hi - h);
            // A saturated cell (flat storage: its head is set by the fluxes alone) that
            // Newton sends into the unsaturated range stops just below its saturation
            // head, where its storage has a slope again: the linearisation of a
            // saturated column knows nothing of the water its cells would release, and
            // the full update would drain them at once (seen where a pond vanishes over
            // a saturated column: the update asks for the hydrostatic profile). Only a
            // cell open to the air (the top cell, or one next to an unsaturated cell)
            // may desaturate in an iteration; one inside a saturated zone stops at its
            // saturation head, so that the drainage starts where air can enter.
            let hs = self.soil_of(i).retention.saturation_head();
            if h >= hs && h + dh < hs {
                let open = i == 0
                    || unsaturated(i - 1, old_above)
                    || (i + 1 < n && unsaturated(i + 1, u[k + BLOCK + H]));
                let floor = if open { hs - DESATURATION_STEP } else { hs };
                dh = dh.max(floor - h);
            }
            old_above = h;
            // Vapour density stays positive.
            let rv = u[k + RV];
            let mut drv = d[RV] * c[RV];
            if rv + drv < 0.1 * rv {
                drv = -0.9 * rv;
            }
            if dt.abs() > r.still_temperature
                || dh.abs() > r.still_head_abs + r.still_head_rel * h.abs()
                || drv.abs() > r.still_vapor_abs + r.still_vapor_rel * rv.abs()
            {
                small = false;
            }
            dx[k + T] = dt;
            dx[k + H] = dh;
            dx[k + RV] = drv;
            u[k + T] += dt;
            u[k + H] += dh;
            u[k + RV] += drv;
        }
        small
    }

    fn accept(&mut self, _u: &[f64]) {
        // The flux parts of linearised interior faces stay left out: no step needs them,
        // and their readers complete them first (`System::complete_face_parts`: the
        // solutes; the profiles come from a direct evaluation).
    }

    fn limit_prediction(&self, predicted: &mut [f64], old: &[f64]) {
        // Vapour density positive, head not above 0 where the old head was below.
        for (p, old) in predicted
            .chunks_exact_mut(BLOCK)
            .zip(old.chunks_exact(BLOCK))
        {
            if p[RV].is_nan() || p[RV] <= 0.0 {
                p[RV] = old[RV];
            }
            if old[H] < 0.0 && p[H] > 0.0 {
                p[H] = 0.5 * old[H];
            }
        }
    }

    /// Temperature and vapour density are tested directly; moisture in liquid content
    /// through the water storage (θl = M_water/ρw for the liquid part that moves), and in
    /// head only where the soil is saturated and θl is flat in h.
    #[inline]
    fn error_tests(
        &self,
        i: usize,
        new: &[f64],
        old: &[f64],
        rtol: f64,
    ) -> [(usize, ErrorTest); BLOCK] {
        let r = &self.rules;
        let direct = |k: usize, atol: f64| {
            let den = atol + rtol * new[k].abs().max(old[k].abs());
            (k, ErrorTest::Unknown { den })
        };
        let th = self.cells[i].theta.v;
        let moisture = if th >= self.soil_of(i).retention.theta_s() {
            ErrorTest::Unknown {
                den: r.atol_head + rtol * new[H].abs(),
            }
        } else {
            ErrorTest::Storage {
                row: WATER,
                factor: 1.0 / WATER_DENSITY,
                den: r.atol_liquid_content + rtol * th,
            }
        };
        [
            direct(T, r.atol_temperature),
            direct(RV, r.atol_vapor),
            (H, moisture),
        ]
    }

    fn change_factor(&self, new: &[f64], old: &[f64]) -> f64 {
        let r = &self.rules;
        let mut max_dt = 0.0f64;
        let mut max_dth = 0.0f64;
        for (i, (x, y)) in new
            .chunks_exact(BLOCK)
            .zip(old.chunks_exact(BLOCK))
            .enumerate()
        {
            max_dt = max_dt.max((x[T] - y[T]).abs());
            let soil = self.soil_of(i);
            let th_new = soil.retention.theta(x[H]).0;
            let th_old = soil.retention.theta(y[H]).0;
            max_dth = max_dth.max((th_new - th_old).abs());
        }
        let mut f = f64::INFINITY;
        if max_dt > 0.0 {
            f = f.min(0.9 * r.target_temperature_change / max_dt);
        }
        if max_dth > 0.0 {
            f = f.min(0.9 * r.target_liquid_content_change / max_dth);
        }
        f
    }

    fn forget_kept(&mut self) {
        self.forget_linearization();
    }

    fn kept_states(&self) -> (&[f64], &[f64]) {
        self.linearization_states()
    }

    fn restore_kept(&mut self, a: &[f64], b: &[f64]) {
        self.restore_linearization(a, b);
    }
}
