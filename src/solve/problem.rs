//! What Newton's method and the time stepper need from a problem: the contract between
//! `solve` (which knows no physics) and the problems that implement it (the soil column
//! in `physics`, the test equations in `tests/solver_conformance.rs`).
//!
//! A problem has `n` blocks of `B` unknowns each (a cell of a 1-D mesh, or the single
//! block of an ODE system); its Jacobian is block-tridiagonal with B×B blocks. It is
//! written in conservation form: for storages `M(u)` per block (B per block, one per
//! row) the time integrator supplies a coefficient `c` and a history term `hist` so that
//! `c·M(u) − hist` approximates dM/dt, and the residual of block i is
//!
//! `R_i(u; t, c, hist) = V_i (c·M_i(u) − hist_i) − f_i(t, u)`
//!
//! with `V_i` the block's weight ([`Problem::volumes`]) and `f_i` everything else (flux
//! differences, sources). Rows without storage (algebraic rows) simply ignore `c` and
//! `hist`. Backward Euler: `c = 1/Δt`, `hist = M(u_old)/Δt`.
//!
//! Conserved quantities: the problem names rows whose residuals sum over the blocks to
//! the step's balance error (interior fluxes cancel in the sum), and reports the flows
//! through its two ends; the stepper integrates those flows with its own weights, so
//! that storage change and cumulative inflow agree to the Newton tolerance.

use super::blocktri::BlockRows;

/// Largest number of conserved quantities a problem may declare.
pub const MAX_CONSERVED: usize = 4;

/// Per conserved quantity (in the order of [`Problem::conserved_rows`]); unused entries 0.
pub type Conserved = [f64; MAX_CONSERVED];

/// A residual or Jacobian entry that is not a finite number: a recoverable step failure.
#[derive(Debug, Clone, PartialEq)]
pub struct NonFinite {
    /// Block (mesh cell) and row within it.
    pub cell: usize,
    pub row: usize,
}

/// What Newton's balance test needs, computed with the convergence scales: per
/// conserved quantity, the round-off floors of its rows summed over the blocks, and
/// what the blocks' storages move in the step, Σ V |c M − hist|.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct BalanceScales {
    pub floor: Conserved,
    pub moved: Conserved,
}

/// How the local error of one unknown is measured (see [`Problem::error_tests`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ErrorTest {
    /// The unknown itself against its extrapolation, with weight `den` (the error is
    /// |estimate| / den).
    Unknown { den: f64 },
    /// The storage of row `row` of the block instead (where the unknown is a poor
    /// measure, e.g. a head where liquid content is what moves), times `factor`, with
    /// weight `den`.
    Storage { row: usize, factor: f64, den: f64 },
}

/// A system of balance laws on a chain of blocks, as Newton and the stepper see it.
pub trait Problem<const B: usize> {
    /// Number of blocks.
    fn blocks(&self) -> usize;

    /// Weight of each block: content = weight × storage (a cell's width [m] on the
    /// mesh; 1 for an ODE system).
    fn volumes(&self) -> &[f64];

    /// The rows (within a block) of the conserved quantities, at most [`MAX_CONSERVED`].
    fn conserved_rows(&self) -> &[usize];

    /// Evaluates the problem at state `u` and time `t` (values only): what the storage
    /// and boundary-flow queries below then read.
    fn evaluate(&mut self, t: f64, u: &[f64]);

    /// Storages of block `i` from the last evaluation (one per row).
    fn storage(&self, i: usize) -> [f64; B];

    /// Storages of every block into `out` (B per block), from the last evaluation.
    fn storage_into(&self, out: &mut [f64]) {
        for (i, o) in out.chunks_exact_mut(B).enumerate() {
            o.copy_from_slice(&self.storage(i));
        }
    }

    /// Flows of the conserved quantities into the first block through its outer end
    /// (`top`) and out of the last block through its outer end (`bottom`), from the last
    /// evaluation (per unit of the weights' measure and time).
    fn boundary_flows(&self) -> (Conserved, Conserved);

    /// Flows of the conserved quantities out of the domain through internal sinks (e.g.
    /// root water uptake), summed over the blocks, from the last evaluation (per unit of
    /// the weights' measure and time). Default: none.
    fn sink_flows(&self) -> Conserved {
        [0.0; MAX_CONSERVED]
    }

    /// Flows of the conserved quantities out of the domain as runoff from a surface
    /// store (water that ponds above its largest depth), from the last evaluation (per
    /// unit of the weights' measure and time). Default: none.
    fn runoff_flows(&self) -> Conserved {
        [0.0; MAX_CONSERVED]
    }

    /// Fills the residual (and, when given, the Jacobian) at state `u`, time `t`, with
    /// integrator coefficient `c` and history `hist` (B per block); refuses NaN and Inf.
    #[allow(clippy::too_many_arguments)]
    fn assemble(
        &mut self,
        t: f64,
        u: &[f64],
        c: f64,
        hist: &[f64],
        res: &mut [f64],
        jac: Option<&mut dyn BlockRows<B>>,
    ) -> Result<(), NonFinite>;

    /// Whether, at every state, the last unknown of each block appears in no other row
    /// than its own, its own row couples only within the block and has no storage (an
    /// algebraic unknown that follows the others, as the equilibrium vapour density):
    /// Newton then keeps the Jacobian in (B−1)×(B−1) blocks plus that row, and the
    /// storage derivatives in (B−1)×(B−1) blocks (see
    /// [`super::blocktri::PackedTri`]). Default: false (full blocks).
    fn last_unknown_decoupled(&self) -> bool {
        false
    }

    /// Whether the run trades time for memory: Newton's linear solver then keeps only
    /// what it cannot read again from the kept Newton matrix (see
    /// [`super::linear::LinearSolver::borrow_from_matrix`]). Default: false.
    fn lean_memory(&self) -> bool {
        false
    }

    /// Derivative of the storage terms `V M(u)` of each block with respect to its own
    /// unknowns, from the last evaluation with derivatives: the part of the Jacobian
    /// that scales with `c` (zero rows for algebraic equations).
    /// Written with [`BlockRows::set_diag`].
    fn storage_jacobian_into(&self, out: &mut dyn BlockRows<B>);

    /// [`Problem::assemble`] with the Jacobian into `jac` and the storage-derivative
    /// blocks into `storage` (as [`Problem::storage_jacobian_into`] after it), in one
    /// call, so that a problem that evaluates both from the same pass may. Default: the
    /// two calls.
    #[allow(clippy::too_many_arguments)]
    fn assemble_with_storage(
        &mut self,
        t: f64,
        u: &[f64],
        c: f64,
        hist: &[f64],
        res: &mut [f64],
        jac: &mut dyn BlockRows<B>,
        storage: &mut dyn BlockRows<B>,
    ) -> Result<(), NonFinite> {
        self.assemble(t, u, c, hist, res, Some(jac))?;
        self.storage_jacobian_into(storage);
        Ok(())
    }

    /// After the last evaluation (by [`Problem::assemble`]): per row, the scale against
    /// which Newton applies its tolerance `tol` (the magnitude of the terms that make
    /// up the row, or its round-off floor / `tol` where that is larger), into `scale`;
    /// and the balance test's floors and storage movements.
    fn convergence_scales_into(
        &self,
        c: f64,
        hist: &[f64],
        tol: f64,
        scale: &mut [f64],
    ) -> BalanceScales;

    /// Typical sizes of the unknowns at `u` (B per block), by which Newton scales the
    /// columns of its linear system.
    fn column_scales_into(&self, u: &[f64], col: &mut [f64]);

    /// Applies Newton's update `dx · col` (the solution of the column-scaled system
    /// times the column scales) to `u`, limited where the problem needs it (sign
    /// constraints, largest change per iteration); the update taken replaces `dx`.
    /// Returns whether every update taken was below the problem's "no longer moving"
    /// thresholds.
    fn apply_update(&self, u: &mut [f64], dx: &mut [f64], col: &[f64]) -> bool;

    /// Called when Newton accepts `u`, whose residual was the last evaluation: complete
    /// anything that evaluation left out for speed (default: nothing).
    fn accept(&mut self, _u: &[f64]) {}

    /// Keeps a predicted state physically admissible (`old`: the last accepted state).
    fn limit_prediction(&self, _predicted: &mut [f64], _old: &[f64]) {}

    /// How the local error of each unknown of block `i` is measured, given the new and
    /// old unknowns of the block and the relative tolerance, from the last evaluation
    /// (at the new state). Tested in the order returned: (unknown index, test).
    fn error_tests(&self, i: usize, new: &[f64], old: &[f64], rtol: f64)
        -> [(usize, ErrorTest); B];

    /// Backward Euler's step-size heuristic: the largest factor by which the step may
    /// grow given the changes from `old` to `new` (∞ when nothing limits it).
    fn change_factor(&self, _new: &[f64], _old: &[f64]) -> f64 {
        f64::INFINITY
    }

    /// Drops evaluations kept between calls as bases for cheaper ones (default: none).
    fn forget_kept(&mut self) {}

    /// The states at which kept evaluations were made (two arrays, empty when none), so
    /// that a saved run continues exactly; see [`Problem::restore_kept`]. Borrowed: a
    /// checkpoint writes them from here, without a copy.
    fn kept_states(&self) -> (&[f64], &[f64]) {
        (&[], &[])
    }

    /// Remakes kept evaluations at the given states (as from [`Problem::kept_states`]).
    fn restore_kept(&mut self, _a: &[f64], _b: &[f64]) {}
}

/// The largest weighted change over every block and unknown, by the problem's error
/// tests at relative tolerance `rtol` (the problem evaluated at `new`; `old` the other
/// state the tests compare it with): an unknown's change `du(j)` over its weight, or a
/// storage's change `ds(j)` times the test's factor over its weight (`j` the index of the
/// unknown, or of the storage row, in the B-per-block layout). A NaN counts as infinite.
/// The measure of cycle skipping's drift change and of the periodic state's updates.
pub fn weighted_change<const B: usize, P: Problem<B> + ?Sized>(
    sys: &P,
    new: &[f64],
    old: &[f64],
    rtol: f64,
    du: impl Fn(usize) -> f64,
    ds: impl Fn(usize) -> f64,
) -> f64 {
    let mut worst = 0.0f64;
    for i in 0..sys.blocks() {
        let r = B * i..B * (i + 1);
        for (k, test) in sys.error_tests(i, &new[r.clone()], &old[r], rtol) {
            let e = match test {
                ErrorTest::Unknown { den } => du(B * i + k).abs() / den,
                ErrorTest::Storage { row, factor, den } => (factor * ds(B * i + row)).abs() / den,
            };
            worst = if e.is_nan() {
                f64::INFINITY
            } else {
                worst.max(e)
            };
        }
    }
    worst
}
