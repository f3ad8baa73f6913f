//! One period of a periodic forcing, integrated as the run integrates it, and the
//! period-mean linearisation of the column: what the periodic steady state
//! ([`super::initial`]) and the implicit jump of cycle skipping
//! ([`super::simulation`], `jump = "implicit"`) have in common.

use crate::error::{Error, Result};
use crate::model::{BottomBc, Model, Periods, SurfaceBc};
use crate::physics::System;
use crate::physics::{H, RV};
use crate::solve::blocktri::BlockTri;
use crate::solve::envelope::{unknowns_of_storages, PeriodPoint, FLOW_PARTS};
use crate::solve::linear::{make_solver, solve_dense, SolverKind};
use crate::solve::problem::Problem;

use super::initial::equilibrate_vapor;
use crate::solve::stepper::{Replay, StepInfo};

use super::{Advance, Begin, Observer, OutputPosition, Request, Simulation, SyncPlan};

/// The model of one period of the spin-up: `model` from its start over one `period`
/// under `surface` and `bottom` (and the plants in force at the start), without outputs,
/// checkpoints, solutes or cycle skipping.
pub fn periodic_model(model: &Model, surface: &SurfaceBc, bottom: &BottomBc, period: f64) -> Model {
    let mut m = model.clone();
    let t0 = model.time.start;
    m.time.end = t0 + period;
    m.time.cycle_skipping = None;
    m.surface = Periods::single(surface.clone());
    m.bottom = Periods::single(bottom.clone());
    m.vegetation = Periods::single(model.vegetation.at(t0).clone());
    // The Jacobian samples of the period's mean: midpoints of JACOBIAN_SAMPLES equal parts.
    m.output.snapshot_times = (0..JACOBIAN_SAMPLES)
        .map(|k| t0 + (k as f64 + 0.5) / JACOBIAN_SAMPLES as f64 * period)
        .chain(std::iter::once(m.time.end))
        .collect();
    m.checkpoint.every = None;
    m.checkpoint.wall_every = None;
    m.solutes.clear();
    m
}

/// Jacobians averaged over a period of the spin-up (the midpoint rule, exact for the
/// harmonics of the period below this order).
pub(crate) const JACOBIAN_SAMPLES: usize = 16;

/// What one period of the spin-up model gives.
pub(crate) struct PeriodEnd {
    pub u: Vec<f64>,
    pub steps: u64,
    /// The cumulative flows over the period as a cycle-skipping point keeps them (net
    /// inflow, throughput, top inflow, sinks, runoff; per conserved quantity: energy,
    /// water).
    pub flows: Vec<f64>,
}

impl PeriodEnd {
    /// Part `part` of the flows (0 net inflow, 1 throughput, 2 top inflow, 3 sinks,
    /// 4 runoff) of conserved quantity `q` (0 energy, 1 water).
    pub fn flow(&self, part: usize, q: usize) -> f64 {
        self.flows[part * self.flows.len() / FLOW_PARTS + q]
    }
}

/// Integrates the spin-up model `m` over its one period from `u` (the run's own
/// time stepping, landing on the forcing's breakpoints), calling `sample` with the time
/// and state at each of the model's snapshot times before its end.
pub(crate) fn one_period(
    m: &Model,
    u: &[f64],
    dt: f64,
    solver: SolverKind,
    sample: &mut dyn FnMut(f64, &[f64]) -> Result<()>,
) -> Result<PeriodEnd> {
    one_period_on_grid(m, u, dt, solver, sample, Grid::Adaptive).map(|(end, _)| end)
}

/// The steps a period recorded ([`Grid::Record`]; else empty) and whether it kept to the
/// steps given ([`Grid::Replay`]; else true).
pub(crate) type GridSteps = (Vec<(f64, usize)>, bool);

/// How the steps of a period are chosen.
pub(crate) enum Grid<'a> {
    /// By the local error test.
    Adaptive,
    /// By the local error test, and recorded (size and order of every step).
    Record,
    /// Those given, taken without the error test (a step whose Newton iteration fails
    /// ends the replay; the rest of the period is taken by the error test).
    Replay(&'a [(f64, usize)]),
}

/// [`one_period`] with the steps chosen as `grid` says. Returns with the period's end
/// the steps recorded ([`Grid::Record`]; else empty) and whether the period kept to
/// the given steps ([`Grid::Replay`]; else true).
pub(crate) fn one_period_on_grid(
    m: &Model,
    u: &[f64],
    dt: f64,
    solver: SolverKind,
    sample: &mut dyn FnMut(f64, &[f64]) -> Result<()>,
    grid: Grid,
) -> Result<(PeriodEnd, GridSteps)> {
    let plan = SyncPlan::new(m)?;
    let syncs = plan.syncs.clone();
    let begin = Begin::Unknowns {
        t: m.time.start,
        dt,
        u: u.to_vec(),
    };
    let mut sim = Simulation::new(m, plan, begin, OutputPosition::default(), solver, None)?;
    let mut watch = TrialWatch {
        record: matches!(grid, Grid::Record),
        steps: Vec::new(),
    };
    if let Grid::Replay(steps) = grid {
        sim.set_replay(Some(Replay {
            steps: steps.to_vec(),
            ..Default::default()
        }));
    }
    for t in syncs {
        if sim.advance_to(t, &mut [&mut watch])? == Advance::Stopped {
            // A replay broken: what follows is not on the grid, and from a state a
            // given step failed at it could take long; the caller gives the period up.
            break;
        }
        if t < m.time.end && m.output.snapshot_times.contains(&t) {
            sample(t, &sim.state().u)?;
        }
    }
    let kept = sim
        .replay()
        .is_none_or(|r| !r.broken && r.next == r.steps.len());
    let st = sim.state();
    let mut flows = Vec::new();
    PeriodPoint::flows_into(st, &mut flows);
    let end = PeriodEnd {
        u: st.u.clone(),
        steps: st.counters.steps,
        flows,
    };
    Ok((end, (watch.steps, kept)))
}

/// Records the size and order of every accepted step (when `record`), and stops a
/// replay as soon as it is broken.
struct TrialWatch {
    record: bool,
    steps: Vec<(f64, usize)>,
}

impl Observer for TrialWatch {
    /// Reads no snapshot.
    fn needs_profile(&self) -> bool {
        false
    }
    fn step_accepted(&mut self, sim: &Simulation, step: &StepInfo) -> Result<Request> {
        if self.record {
            self.steps.push((step.dt, step.order));
        }
        if sim.replay().is_some_and(|r| r.broken) {
            return Ok(Request::Stop);
        }
        Ok(Request::Continue)
    }
}

/// The period-mean linearisation of the last period: (S/τ − F̄) δ = ΔS/P.
pub(crate) struct MeanLinearization {
    /// −F̄, unscaled.
    pub(crate) mean_jac: BlockTri<3>,
    /// S: the storage Jacobian (diagonal blocks) at the period's end.
    pub(crate) stor: Vec<crate::solve::blocktri::Block<3>>,
    /// Row and column scales, and ΔS/P.
    pub(crate) row: Vec<f64>,
    pub(crate) col: Vec<f64>,
    pub(crate) rhs: Vec<f64>,
    pub(crate) a: BlockTri<3>,
    pub(crate) lin: Box<dyn crate::solve::linear::LinearSolver<3>>,
}

impl MeanLinearization {
    pub(crate) fn new(n: usize, solver: SolverKind) -> Self {
        MeanLinearization {
            mean_jac: BlockTri::new(n),
            stor: vec![[[0.0; 3]; 3]; n],
            row: vec![0.0; 3 * n],
            col: vec![0.0; 3 * n],
            rhs: vec![0.0; 3 * n],
            a: BlockTri::new(n),
            lin: make_solver(solver, n),
        }
    }

    /// The change of storage `j` (block j / 3, row j % 3) that update `delta` makes to
    /// first order, (S δ)_j / V.
    pub(crate) fn content_change(&self, delta: &[f64], volumes: &[f64], j: usize) -> f64 {
        let (i, r) = (j / 3, j % 3);
        (0..3)
            .map(|c| self.stor[i][r][c] * delta[3 * i + c])
            .sum::<f64>()
            / volumes[i]
    }

    /// δ, unscaled, for pseudo-time step `tau` [s] (∞: without S), with its own
    /// right-hand side.
    pub(crate) fn solve(&mut self, tau: f64, delta: &mut [f64]) -> std::result::Result<(), String> {
        let rhs = std::mem::take(&mut self.rhs);
        let out = self.solve_with(tau, &rhs, delta);
        self.rhs = rhs;
        out
    }

    /// δ, unscaled, of (S/τ − F̄) δ = `rhs` for pseudo-time step `tau` [s] (∞: without S).
    pub(crate) fn solve_with(
        &mut self,
        tau: f64,
        rhs: &[f64],
        delta: &mut [f64],
    ) -> std::result::Result<(), String> {
        let a = &mut self.a;
        a.lower.copy_from_slice(&self.mean_jac.lower);
        a.upper.copy_from_slice(&self.mean_jac.upper);
        for (d, (mj, st)) in a
            .diag
            .iter_mut()
            .zip(self.mean_jac.diag.iter().zip(&self.stor))
        {
            for r in 0..3 {
                for c in 0..3 {
                    d[r][c] = mj[r][c] + st[r][c] / tau;
                }
            }
        }
        a.scale(&self.row, &self.col);
        for ((d, r), x) in delta.iter_mut().zip(&self.row).zip(rhs) {
            *d = x * r;
        }
        self.lin
            .factor(a)
            .and_then(|_| self.lin.solve(delta))
            .map_err(|e| {
                format!(
                    "the period-mean Jacobian cannot be solved ({e:?}): a column closed at both ends has no unique periodic state"
                )
            })?;
        for (d, c) in delta.iter_mut().zip(&self.col) {
            *d *= c;
        }
        Ok(())
    }
}

/// The state the update `delta` from `phi` (storages `s_phi`) leads to, in the contents:
/// the contents of `phi` moved by S δ (S: the storage Jacobian blocks of `lin`), and the
/// unknowns found from them cell by cell ([`unknowns_of_storages`]), from the update
/// limited as a Newton update ([`Problem::apply_update`]); the vapour in equilibrium where
/// it is algebraic. Where a small change of content is a large change of head (dry
/// cells), the head follows the content, not the linearisation.
pub(crate) fn corrected(
    sys: &mut System,
    t: f64,
    phi: &[f64],
    s_phi: &[f64],
    delta: &mut [f64],
    lin: &MeanLinearization,
) -> Vec<f64> {
    let volumes = sys.volumes().to_vec();
    let change: Vec<f64> = (0..delta.len())
        .map(|j| lin.content_change(delta, &volumes, j))
        .collect();
    moved_contents(sys, t, phi, s_phi, &change, delta)
}

/// The state whose contents are those of `phi` (storages `s_phi`) moved by `change` (per
/// unit volume, every storage row), its unknowns found cell by cell
/// ([`unknowns_of_storages`]) from `phi` moved by `guess` (limited as a Newton update,
/// [`Problem::apply_update`]); the vapour in equilibrium where it is algebraic.
pub(crate) fn moved_contents(
    sys: &mut System,
    t: f64,
    phi: &[f64],
    s_phi: &[f64],
    change: &[f64],
    guess: &mut [f64],
) -> Vec<f64> {
    let mut target = s_phi.to_vec();
    let mut scale = vec![0.0; target.len()];
    for ((x, s), c) in target.iter_mut().zip(scale.iter_mut()).zip(change) {
        *x += c;
        *s = x.abs().max(c.abs());
    }
    let mut u = phi.to_vec();
    let ones = vec![1.0; u.len()];
    sys.apply_update(&mut u, guess, &ones);
    unknowns_of_storages(sys, t, &mut u, &target, &scale, phi);
    if sys.last_unknown_decoupled() {
        equilibrate_vapor(&mut u);
    }
    u
}

/// Adds the Jacobian of the fluxes and sources of `sys` at (`t`, `u`), −∂f/∂x, divided by
/// [`JACOBIAN_SAMPLES`], into `acc` (`jac`, `res` and `zeros`: work arrays of the system's
/// size; the kept evaluations are dropped first, so the sample is a direct evaluation).
pub(crate) fn add_jacobian_sample(
    sys: &mut System,
    t: f64,
    u: &[f64],
    zeros: &[f64],
    res: &mut [f64],
    jac: &mut BlockTri<3>,
    acc: &mut BlockTri<3>,
) -> Result<()> {
    sys.forget_kept();
    sys.assemble(t, u, 0.0, zeros, res, Some(jac))
        .map_err(|nf| {
            Error::Numerical(format!(
                "the Jacobian is not finite at cell {} row {}",
                nf.cell, nf.row
            ))
        })?;
    for (a, b) in [
        (&mut acc.lower, &jac.lower),
        (&mut acc.diag, &jac.diag),
        (&mut acc.upper, &jac.upper),
    ] {
        for (x, y) in a.iter_mut().zip(b.iter()) {
            for (xr, yr) in x.iter_mut().zip(y) {
                for (xc, yc) in xr.iter_mut().zip(yr) {
                    *xc += yc / JACOBIAN_SAMPLES as f64;
                }
            }
        }
    }
    Ok(())
}

/// Weights of the unknowns for the acceleration: temperature in K, head relative to
/// 1 m + |h|, vapour density relative to 1e-3 kg m⁻³ + ρv.
pub(crate) fn weights_of(u: &[f64]) -> Vec<f64> {
    u.chunks_exact(3)
        .flat_map(|x| [1.0, 1.0 / (1.0 + x[H].abs()), 1.0 / (1e-3 + x[RV].abs())])
        .collect()
}

/// Anderson acceleration (Walker & Ni 2011, SIAM J. Numer. Anal. 49: "Anderson
/// acceleration for fixed-point iterations", type II with unconstrained least squares)
/// of x ← g(x): the next iterate is g_k − Σ γ_j Δg_j with γ minimising
/// ‖f_k − Σ γ_j Δf_j‖ (f = g − x, weighted), over the last `depth` differences.
pub(crate) struct Anderson {
    depth: usize,
    g: std::collections::VecDeque<Vec<f64>>,
    f: std::collections::VecDeque<Vec<f64>>,
}

impl Anderson {
    /// Over the last `depth` differences.
    pub(crate) fn new(depth: usize) -> Self {
        Anderson {
            depth,
            g: Default::default(),
            f: Default::default(),
        }
    }

    pub(crate) fn len(&self) -> usize {
        self.g.len()
    }

    pub(crate) fn clear(&mut self) {
        self.g.clear();
        self.f.clear();
    }

    pub(crate) fn next(&mut self, x: &[f64], g: &[f64], w: &[f64]) -> Vec<f64> {
        let f: Vec<f64> = g
            .iter()
            .zip(x)
            .zip(w)
            .map(|((g, x), w)| (g - x) * w)
            .collect();
        self.g.push_back(g.to_vec());
        self.f.push_back(f);
        if self.g.len() > self.depth + 1 {
            self.g.pop_front();
            self.f.pop_front();
        }
        let k = self.g.len() - 1;
        if k == 0 {
            return g.to_vec();
        }
        let df: Vec<Vec<f64>> = (0..k)
            .map(|j| {
                self.f[j + 1]
                    .iter()
                    .zip(&self.f[j])
                    .map(|(a, b)| a - b)
                    .collect()
            })
            .collect();
        let fk = &self.f[k];
        // The normal equations, each row augmented with its right-hand side.
        let mut a = vec![vec![0.0; k + 1]; k];
        for i in 0..k {
            for j in 0..k {
                a[i][j] = df[i].iter().zip(&df[j]).map(|(p, q)| p * q).sum();
            }
            a[i][i] *= 1.0 + 1e-10;
            a[i][k] = df[i].iter().zip(fk).map(|(p, q)| p * q).sum();
        }
        let mut gamma = vec![0.0; k];
        if !solve_dense(&mut a, &mut gamma) {
            self.clear();
            return g.to_vec();
        }
        let mut out = g.to_vec();
        for (j, gj) in gamma.iter().enumerate() {
            for ((o, g1), g0) in out.iter_mut().zip(&self.g[j + 1]).zip(&self.g[j]) {
                *o -= gj * (g1 - g0);
            }
        }
        out
    }
}
