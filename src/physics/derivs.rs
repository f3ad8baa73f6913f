//! The evaluation with derivatives and what is built from it: the Jacobian blocks, the
//! storage-derivative blocks and the linearised value evaluations (see
//! [`System::evaluate`]).
//!
//! `N` derivative slots per cell and `M` = 2N per face: 3 and 6 (T, h, rv) in kinetic
//! mode; 2 and 4 (T, h) in equilibrium mode, where the vapour density inside the physics
//! is the function rveq(T, h) (see [`cell_props`]): no property depends on the vapour
//! unknown, whose row is the algebraic `rv − rveq(T, h)`. The Jacobian is written as 3×3
//! blocks, row by row; in equilibrium mode their vapour column is zero outside that row,
//! so Newton keeps them packed (2×2 blocks plus that row) and the block-tridiagonal
//! solver solves the 2×2 system.

use super::cell::{cell_props, CellProps, CellValues, FaceInputs, KeptCell};
use super::dual::Dual;
use super::flux::FaceFlux;
use super::BLOCK;
use super::{System, ENERGY, H, RV, T, VAPOR, WATER};
use crate::solve::blocktri::{zero_block, Block, BlockRows};
use crate::solve::problem::NonFinite;

/// Largest relative change of a cell's unknowns from the base of a kept evaluation with
/// derivatives (head: relative to max(|h|, 0.01 m)), within which its values are taken
/// by linearisation from it.
pub(super) const LINEAR_CHANGE: f64 = 1e-7;

/// Whether the unknowns `x` of a cell (T, h, rv) lie within [`LINEAR_CHANGE`] of `x0`
/// (rv only when it is an unknown of the derivatives, `with_rv`). False when `x0` is
/// NaN (no base).
#[inline]
fn near(x: &[f64], x0: &[f64], with_rv: bool) -> bool {
    (x[T] - x0[T]).abs() <= LINEAR_CHANGE * x0[T].abs()
        && (x[H] - x0[H]).abs() <= LINEAR_CHANGE * x0[H].abs().max(1e-2)
        && (!with_rv || (x[RV] - x0[RV]).abs() <= LINEAR_CHANGE * x0[RV].abs())
}

/// The first `N` differences x − x0 (the derivative slots of one cell).
#[inline]
fn change<const N: usize>(x: &[f64], x0: &[f64]) -> [f64; N] {
    let mut du = [0.0; N];
    for (k, d) in du.iter_mut().enumerate() {
        *d = x[k] - x0[k];
    }
    du
}

/// What a face keeps of its flux parts at its base: the round-off scales and the
/// vapour parts, which the convergence test reads (48 B instead of the 80 B of all the
/// parts); the liquid and heat parts of a face that keeps its base are left out (NaN)
/// until completed at the current state ([`Kept::complete_parts`]), as its vapour parts
/// are.
#[derive(Debug, Clone, Copy)]
struct FaceBase {
    vapor_iso: f64,
    vapor_th: f64,
    scale_water: f64,
    scale_energy: f64,
    operands_water: f64,
    operands_energy: f64,
}

impl FaceBase {
    #[inline]
    fn of(f: &FaceFlux<0>) -> Self {
        FaceBase {
            vapor_iso: f.vapor_iso.v,
            vapor_th: f.vapor_th.v,
            scale_water: f.scale_water,
            scale_energy: f.scale_energy,
            operands_water: f.operands_water,
            operands_energy: f.operands_energy,
        }
    }

    /// The face's values until its parts are completed: the kept parts, NaN for the rest.
    #[inline]
    fn placeholder(&self) -> FaceFlux<0> {
        let none = Dual::cst(f64::NAN);
        FaceFlux {
            liquid_iso: none,
            liquid_th: none,
            vapor_iso: Dual::cst(self.vapor_iso),
            vapor_th: Dual::cst(self.vapor_th),
            conduction: none,
            t_face: none,
            scale_water: self.scale_water,
            scale_energy: self.scale_energy,
            operands_water: self.operands_water,
            operands_energy: self.operands_energy,
        }
    }
}

/// Cell properties and interior-face fluxes with `N` (`M`) derivative slots, each kept
/// with the state it was evaluated at (its *base*; NaN: none): a cell's own unknowns,
/// and for a face the unknowns of both its cells. An evaluation with derivatives
/// re-evaluates a cell only when it moved more than [`LINEAR_CHANGE`] from its base or
/// one of its faces must be re-evaluated (a face is evaluated from its two cells
/// evaluated at the same state), and a face only when one of its cells moved that far
/// from the face's base; the others keep their base (derivatives at the base, values
/// linearised to the current state). So every base entry is a direct evaluation at its
/// base state, a pure function of the base states: restoring them restores it exactly
/// ([`Derivs::restore`], for resuming a run).
///
/// Of a face, only its totals (the residual's terms) keep their derivatives; of its flux
/// parts only what the convergence scales read is kept, at the base ([`FaceBase`]), and
/// the parts of a linearised face are evaluated directly from its cells when asked for
/// ([`Kept::complete_parts`]). A cell keeps only what its own rows and the error test
/// read ([`KeptCell`]; its unknowns are its base state), so it is linearised only where
/// both its faces keep their bases too; runs that ask for the flux parts at every step
/// (solutes) also keep what its faces read ([`FaceInputs`]).
#[derive(Debug, Clone)]
pub(super) struct Derivs<const N: usize, const M: usize, const R: usize> {
    /// Without the unknowns, which `cell_base` gives (see [`KeptCell`]).
    cells: Vec<KeptCell<N>>,
    /// Only where the system completes the flux parts at every step
    /// (`System::parts_each_step`; else empty).
    face_inputs: Vec<FaceInputs<N>>,
    cell_base: Vec<f64>,
    faces: Vec<FaceBase>,
    /// The first `R` totals (energy, water, and the vapour total in kinetic mode: in
    /// equilibrium mode the vapour row is algebraic and no formula reads a face's vapour
    /// total, which saves 40 B per face).
    totals: Vec<[Dual<M>; R]>,
    face_base: Vec<[f64; 6]>,
    /// Scratch: per face, whether it keeps its base.
    face_kept: Vec<bool>,
}

impl<const N: usize, const M: usize, const R: usize> Default for Derivs<N, M, R> {
    fn default() -> Self {
        Derivs {
            cells: Vec::new(),
            face_inputs: Vec::new(),
            cell_base: Vec::new(),
            faces: Vec::new(),
            totals: Vec::new(),
            face_base: Vec::new(),
            face_kept: Vec::new(),
        }
    }
}

/// Adds the derivatives of cell i's source terms (root uptake, runoff) to its diagonal
/// block (see [`Kept::jacobian_into`]).
pub(super) type SourceJacobian<'a> = dyn Fn(usize, &mut Block<BLOCK>) + 'a;

/// What the system asks of its kept evaluations, whatever their number of slots (the
/// methods of [`Derivs`], see there).
pub(super) trait Kept {
    fn forget(&mut self);
    fn bases(&self) -> (&[f64], &[f64]);
    fn restore(&mut self, sys: &System, cells: &[f64], faces: &[f64]);
    /// Returns whether some face kept its base (its flux parts are then those of the
    /// base, to be completed by [`Kept::complete_parts`]).
    fn evaluate(&mut self, sys: &mut System, t: f64, u: &[f64]) -> bool;
    #[allow(clippy::too_many_arguments)]
    fn linearised(
        &self,
        sys: &System,
        t: f64,
        u: &[f64],
        cells: &mut [CellValues],
        whole: &mut [CellProps<0>],
        faces: &mut [FaceFlux<0>],
        totals: &mut [[Dual<0>; BLOCK]],
        parts: bool,
    ) -> bool;
    fn complete_parts(
        &self,
        sys: &System,
        u: &[f64],
        whole: Option<&[CellProps<0>]>,
        faces: &mut [FaceFlux<0>],
    );
    /// With `storage`, the storage-derivative blocks too (as [`Kept::storage_blocks_into`]).
    #[allow(clippy::too_many_arguments)]
    fn jacobian_into(
        &self,
        sys: &System,
        t: f64,
        u: &[f64],
        c: f64,
        jac: &mut dyn BlockRows<BLOCK>,
        sources: Option<&SourceJacobian>,
        storage: Option<&mut dyn BlockRows<BLOCK>>,
    ) -> Result<(), NonFinite>;
    fn storage_blocks_into(&self, sys: &System, out: &mut dyn BlockRows<BLOCK>);
    /// The heap arrays of the kept evaluations (see [`crate::memory`]).
    fn arrays(&self, out: &mut Vec<crate::memory::ArrayCost>);
}

impl<const N: usize, const M: usize, const R: usize> Derivs<N, M, R> {
    /// Whether the vapour density is one of the derivative slots (kinetic mode).
    const WITH_RV: bool = N > RV;

    /// Sizes the workspace for `sys` (no bases).
    fn allocate(&mut self, sys: &System) {
        let n = sys.n;
        if self.cells.len() == n {
            return;
        }
        let any = cell_props(
            sys.soil_of(0),
            &sys.physics,
            Dual::cst(293.15),
            Dual::cst(-1.0),
            Dual::cst(0.01),
            0.0,
            0.0,
        );
        self.cells = vec![KeptCell::of(&any); n];
        self.face_inputs = if sys.parts_each_step {
            vec![FaceInputs::of(&any); n]
        } else {
            Vec::new()
        };
        self.cell_base = vec![f64::NAN; BLOCK * n];
        self.faces = vec![FaceBase::of(&FaceFlux::zero()); n + 1];
        self.totals = vec![[Dual::cst(0.0); R]; n + 1];
        self.face_base = vec![[f64::NAN; 6]; n + 1];
        self.face_kept = vec![false; n + 1];
    }

    /// Whether the unknowns of face `j`'s two cells lie near the face's base.
    #[inline]
    fn face_near(&self, j: usize, u: &[f64]) -> bool {
        let b = &self.face_base[j];
        near(&u[BLOCK * (j - 1)..BLOCK * j], &b[..BLOCK], Self::WITH_RV)
            && near(&u[BLOCK * j..BLOCK * j + BLOCK], &b[BLOCK..], Self::WITH_RV)
    }

    /// The flux parts of interior face `j` evaluated directly from the values `up`, `lo`
    /// of its cells, with the round-off scales of its base (which the convergence test
    /// reads whether the parts are completed or not).
    #[inline]
    fn parts_at(
        &self,
        sys: &System,
        j: usize,
        up: &CellProps<0>,
        lo: &CellProps<0>,
    ) -> FaceFlux<0> {
        let base = &self.faces[j];
        let mut f: FaceFlux<0> = sys.interior_face(up, lo, j);
        f.scale_water = base.scale_water;
        f.scale_energy = base.scale_energy;
        f.operands_water = base.operands_water;
        f.operands_energy = base.operands_energy;
        f
    }

    /// Keeps cell `i`'s record `c` (and its face inputs where kept).
    #[inline]
    fn keep_cell(&mut self, i: usize, c: &CellProps<N>) {
        self.cells[i] = KeptCell::of(c);
        if let Some(e) = self.face_inputs.get_mut(i) {
            *e = FaceInputs::of(c);
        }
    }

    /// Face `j`'s totals linearised to the change `du` from its base.
    #[inline]
    fn totals_at(&self, j: usize, du: &[f64; M]) -> [Dual<0>; BLOCK] {
        let td = &self.totals[j];
        std::array::from_fn(|k| td.get(k).map_or(Dual::cst(f64::NAN), |t| t.taylor(du)))
    }

    /// The change of the unknowns of face `j`'s two cells from the face's base, in the
    /// face's derivative slots.
    #[inline]
    fn face_change(&self, j: usize, u: &[f64]) -> [f64; M] {
        let b = &self.face_base[j];
        let mut du = [0.0; M];
        for k in 0..N {
            du[k] = u[BLOCK * (j - 1) + k] - b[k];
            du[N + k] = u[BLOCK * j + k] - b[BLOCK + k];
        }
        du
    }
}

impl<const N: usize, const M: usize, const R: usize> Kept for Derivs<N, M, R> {
    /// Forgets every base (the next evaluations are direct).
    fn forget(&mut self) {
        self.cell_base.fill(f64::NAN);
        for b in self.face_base.iter_mut() {
            *b = [f64::NAN; 6];
        }
    }

    /// The base states: of the cells (3 per cell) and of the faces (6 per face: the
    /// unknowns of the cell above and below); NaN where there is none. Empty before the
    /// first evaluation.
    fn bases(&self) -> (&[f64], &[f64]) {
        (&self.cell_base, self.face_base.as_flattened())
    }

    /// Re-evaluates the bases at the given base states (as from [`Derivs::bases`]);
    /// bases of the wrong size are ignored (all direct).
    fn restore(&mut self, sys: &System, cells: &[f64], faces: &[f64]) {
        let n = sys.n;
        self.allocate(sys);
        self.forget();
        if cells.len() != BLOCK * n || faces.len() != 6 * (n + 1) {
            return;
        }
        let props = |i: usize, x: &[f64]| sys.props_at::<N>(i, x);
        for i in 0..n {
            let x = &cells[BLOCK * i..BLOCK * i + BLOCK];
            if x.iter().all(|v| v.is_finite()) {
                self.keep_cell(i, &props(i, x));
                self.cell_base[BLOCK * i..BLOCK * i + BLOCK].copy_from_slice(x);
            }
        }
        for j in 1..n {
            let x = &faces[6 * j..6 * j + 6];
            if x.iter().all(|v| v.is_finite()) {
                let f: FaceFlux<M> =
                    sys.interior_face(&props(j - 1, &x[..BLOCK]), &props(j, &x[BLOCK..]), j);
                self.totals[j] = rows_of(f.totals());
                self.faces[j] = FaceBase::of(&f.values());
                self.face_base[j].copy_from_slice(x);
            }
        }
    }

    /// Evaluates `sys` at (t, u) with derivatives (re-evaluating what moved, see the
    /// type's doc) and writes the values into its value workspace.
    fn evaluate(&mut self, sys: &mut System, t: f64, u: &[f64]) -> bool {
        let n = sys.n;
        self.allocate(sys);
        let mut any_kept = false;
        // Faces that keep their base: both cells near the face's base. Boundary faces
        // depend on time and are always evaluated.
        self.face_kept[0] = false;
        self.face_kept[n] = false;
        for j in 1..n {
            self.face_kept[j] = self.face_near(j, u);
        }
        // Cells and the interior face above each, in one pass: a face evaluated afresh
        // reads the whole records of its two cells, both evaluated directly in this pass
        // (a face that does not keep its base makes both its cells direct), kept here
        // in two alternating slots while needed (the kept records hold only what the
        // cells' own rows read). The end cells are always direct (their boundary faces
        // are evaluated), and their boundary faces are evaluated as soon as they are.
        let mut slot: [CellProps<N>; 2] = [CellProps::undefined(), CellProps::undefined()];
        let mut top = None;
        let mut bottom = None;
        for i in 0..n {
            let x = &u[BLOCK * i..BLOCK * i + BLOCK];
            let direct = !near(
                x,
                &self.cell_base[BLOCK * i..BLOCK * i + BLOCK],
                Self::WITH_RV,
            ) || !self.face_kept[i]
                || !self.face_kept[i + 1];
            let (here, prev) = (i % 2, 1 - i % 2);
            if direct {
                slot[here] = sys.props_at::<N>(i, x);
                let c = &slot[here];
                self.keep_cell(i, c);
                self.cell_base[BLOCK * i..BLOCK * i + BLOCK].copy_from_slice(x);
                sys.cells[i] = c.kept_values();
            } else {
                let x0 = &self.cell_base[BLOCK * i..BLOCK * i + BLOCK];
                sys.cells[i] = self.cells[i].taylor(
                    x[T],
                    x[H],
                    Self::WITH_RV.then_some(x[RV]),
                    &change::<N>(x, x0),
                );
            }
            if i == 0 || i == n - 1 {
                // Direct: their boundary faces are never kept.
                let c = &slot[here];
                if i == 0 {
                    top = Some(sys.top_face(t, c));
                }
                if i == n - 1 {
                    bottom = Some(sys.bottom_face(t, c));
                }
            }
            // Face j = i, between cells i − 1 and i.
            let j = i;
            if j == 0 {
                continue;
            }
            if self.face_kept[j] {
                let du = self.face_change(j, u);
                // The parts at the base (their scales are what the convergence test
                // reads), completed at `u` on demand.
                sys.faces[j] = self.faces[j].placeholder();
                sys.face_totals[j] = self.totals_at(j, &du);
                any_kept = true;
            } else {
                // Both its cells were evaluated directly (above and last pass).
                let f = sys.interior_face(&slot[prev], &slot[here], j);
                let tot = f.totals();
                self.totals[j] = rows_of(tot);
                let v = f.values();
                self.faces[j] = FaceBase::of(&v);
                self.face_base[j][..BLOCK].copy_from_slice(&u[BLOCK * (j - 1)..BLOCK * j]);
                self.face_base[j][BLOCK..].copy_from_slice(&u[BLOCK * j..BLOCK * j + BLOCK]);
                sys.faces[j] = v;
                sys.face_totals[j] = value_totals(&tot);
            }
        }
        let (Some(top), Some(bottom)) = (top, bottom) else {
            return any_kept;
        };
        for (j, f) in [(0, top), (n, bottom)] {
            let tot = f.totals();
            self.totals[j] = rows_of(tot);
            let v = f.values();
            self.faces[j] = FaceBase::of(&v);
            sys.faces[j] = v;
            sys.face_totals[j] = value_totals(&tot);
        }
        any_kept
    }

    /// The value evaluation at (t, u): faces near their bases by linearisation, cells
    /// too where they and both their faces are, the others directly, into `cells`,
    /// `faces`, `totals` (as [`Derivs::evaluate`] chooses, so a face evaluated afresh
    /// reads two direct cells). Where the face inputs are kept (a run that asks for the
    /// flux parts at every step), every cell near its base is linearised, its whole
    /// record too, and every cell's whole record goes into `whole` (else empty), from
    /// which [`Derivs::complete_parts`] completes the parts. Without `parts`, a
    /// linearised face gets its totals only (what the residual needs), its flux parts
    /// are left as they were. False, and nothing written, when the workspace is not set
    /// up for this system.
    #[allow(clippy::too_many_arguments)]
    fn linearised(
        &self,
        sys: &System,
        t: f64,
        u: &[f64],
        cells: &mut [CellValues],
        whole: &mut [CellProps<0>],
        faces: &mut [FaceFlux<0>],
        totals: &mut [[Dual<0>; BLOCK]],
        parts: bool,
    ) -> bool {
        let n = sys.n;
        if self.cells.len() != n || u.len() != BLOCK * n {
            return false;
        }
        let inputs = !self.face_inputs.is_empty() && whole.len() == n;
        // Whether the face above cell i keeps its base (boundary faces never do).
        let mut above_near = false;
        // The whole records of the last two cells evaluated as such: a face evaluated
        // afresh reads those of its two cells.
        let mut pair: [CellProps<0>; 2] = [CellProps::undefined(), CellProps::undefined()];
        for i in 0..n {
            let below_near = i + 1 < n && self.face_near(i + 1, u);
            let x = &u[BLOCK * i..BLOCK * i + BLOCK];
            let x0 = &self.cell_base[BLOCK * i..BLOCK * i + BLOCK];
            let (here, prev) = (i % 2, 1 - i % 2);
            let near_base = near(x, x0, Self::WITH_RV);
            if near_base && above_near && below_near && !inputs {
                cells[i] = self.cells[i].taylor(
                    x[T],
                    x[H],
                    Self::WITH_RV.then_some(x[RV]),
                    &change::<N>(x, x0),
                );
            } else {
                pair[here] = if near_base && inputs {
                    self.face_inputs[i].whole(
                        &self.cells[i],
                        x[T],
                        x[H],
                        Self::WITH_RV.then_some(x[RV]),
                        &change::<N>(x, x0),
                    )
                } else {
                    sys.props_at(i, x)
                };
                cells[i] = pair[here].kept_values();
                if inputs {
                    whole[i] = pair[here];
                }
            }
            // The end cells have their whole records: their boundary faces are never kept.
            if i == 0 {
                faces[0] = sys.top_face(t, &pair[here]);
            }
            if i == n - 1 {
                faces[n] = sys.bottom_face(t, &pair[here]);
            }
            // Face j = i, between cells i − 1 and i.
            let j = i;
            if j >= 1 {
                if above_near {
                    totals[j] = self.totals_at(j, &self.face_change(j, u));
                } else {
                    let f = sys.interior_face(&pair[prev], &pair[here], j);
                    totals[j] = f.totals();
                    faces[j] = f;
                }
            }
            above_near = below_near;
        }
        totals[0] = faces[0].totals();
        totals[n] = faces[n].totals();
        if parts {
            self.complete_parts(sys, u, inputs.then_some(&*whole), faces);
        }
        true
    }

    /// The flux parts of the linearised interior faces at `u`, left out by
    /// [`Derivs::linearised`] without `parts` at the same `u` (the totals and the other
    /// faces are already there), from the whole records of their cells: those it left
    /// in `whole` where given, else evaluated directly (a linearised cell holds only its
    /// kept properties).
    fn complete_parts(
        &self,
        sys: &System,
        u: &[f64],
        whole: Option<&[CellProps<0>]>,
        faces: &mut [FaceFlux<0>],
    ) {
        if self.cells.len() != sys.n {
            return;
        }
        if let Some(whole) = whole {
            for j in 1..sys.n {
                if self.face_near(j, u) {
                    faces[j] = self.parts_at(sys, j, &whole[j - 1], &whole[j]);
                }
            }
            return;
        }
        let direct = |i: usize| sys.props_at::<0>(i, &u[BLOCK * i..BLOCK * i + BLOCK]);
        // The cell above the face, while the face above it was linearised too.
        let mut above: Option<CellProps<0>> = None;
        for j in 1..sys.n {
            if self.face_near(j, u) {
                let up = above.take().unwrap_or_else(|| direct(j - 1));
                let lo = direct(j);
                faces[j] = self.parts_at(sys, j, &up, &lo);
                above = Some(lo);
            } else {
                above = None;
            }
        }
    }

    /// The Jacobian of the residual of [`System::assemble`] with coefficient `c` into
    /// `jac`, block row by block row, with `sources(i, diag)` (when given) adding the
    /// derivatives of cell i's source terms last. Each entry sums, in this order, the cell's storage
    /// and local terms, the face above, the face below and the sources. NaN or Inf: the
    /// first in a lower block, else in a diagonal, else in an upper one (by block row,
    /// then row).
    fn jacobian_into(
        &self,
        sys: &System,
        _t: f64,
        _u: &[f64],
        c: f64,
        jac: &mut dyn BlockRows<BLOCK>,
        sources: Option<&SourceJacobian>,
        storage: Option<&mut dyn BlockRows<BLOCK>>,
    ) -> Result<(), NonFinite> {
        if let Some(out) = storage {
            self.storage_blocks_into(sys, out);
        }
        let mut bad = FirstNonFinite::default();
        let mut blocks = [zero_block::<BLOCK>(); 3];
        for i in 0..sys.n {
            jacobian_row(
                sys,
                i,
                c,
                &self.cells[i],
                &self.cell_base[BLOCK * i..BLOCK * i + BLOCK],
                [&self.totals[i], &self.totals[i + 1]],
                sources,
                &mut blocks,
            );
            bad.check(i, &blocks);
            jac.set_row(i, &blocks[0], &blocks[1], &blocks[2]);
        }
        bad.result()
    }

    fn arrays(&self, out: &mut Vec<crate::memory::ArrayCost>) {
        use crate::memory::push;
        const OWNER: &str = "kept evaluations";
        push(out, OWNER, "cell records (Dual)", &self.cells);
        push(
            out,
            OWNER,
            "cell face inputs (Dual; solute runs)",
            &self.face_inputs,
        );
        push(out, OWNER, "cell base states", &self.cell_base);
        push(out, OWNER, "face parts at base", &self.faces);
        push(out, OWNER, "face totals (Dual)", &self.totals);
        push(out, OWNER, "face base states", &self.face_base);
        push(out, OWNER, "face kept flags", &self.face_kept);
    }

    /// The storage-derivative blocks (see [`System::storage_jacobian_into`]).
    fn storage_blocks_into(&self, sys: &System, out: &mut dyn BlockRows<BLOCK>) {
        for i in 0..sys.n {
            out.set_diag(i, &storage_block(sys, i, &self.cells[i]));
        }
    }
}

/// The evaluations with derivatives of a run that keeps none (`[time] memory = "lean"`):
/// every value evaluation is direct, and the Jacobian and the storage-derivative blocks
/// are evaluated afresh from the state, cell by cell and face by face, holding only the
/// two cells and the face at hand. No array per cell or face (against the 321 B per
/// cell of [`Derivs`] in equilibrium mode); a Jacobian costs a value evaluation more,
/// and every residual is evaluated directly. The Jacobian is bitwise that of [`Derivs`]
/// with no base kept.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct Streamed<const N: usize, const M: usize, const R: usize>;

impl<const N: usize, const M: usize, const R: usize> Kept for Streamed<N, M, R> {
    fn forget(&mut self) {}

    fn bases(&self) -> (&[f64], &[f64]) {
        (&[], &[])
    }

    fn restore(&mut self, _sys: &System, _cells: &[f64], _faces: &[f64]) {}

    /// The values alone, directly (the derivatives are evaluated by
    /// [`Kept::jacobian_into`] at the same state).
    fn evaluate(&mut self, sys: &mut System, t: f64, u: &[f64]) -> bool {
        sys.evaluate_direct(t, u);
        false
    }

    fn linearised(
        &self,
        _sys: &System,
        _t: f64,
        _u: &[f64],
        _cells: &mut [CellValues],
        _whole: &mut [CellProps<0>],
        _faces: &mut [FaceFlux<0>],
        _totals: &mut [[Dual<0>; BLOCK]],
        _parts: bool,
    ) -> bool {
        false
    }

    /// Nothing to complete: every evaluation is direct.
    fn complete_parts(
        &self,
        _sys: &System,
        _u: &[f64],
        _whole: Option<&[CellProps<0>]>,
        _faces: &mut [FaceFlux<0>],
    ) {
    }

    fn jacobian_into(
        &self,
        sys: &System,
        t: f64,
        u: &[f64],
        c: f64,
        jac: &mut dyn BlockRows<BLOCK>,
        sources: Option<&SourceJacobian>,
        mut storage: Option<&mut dyn BlockRows<BLOCK>>,
    ) -> Result<(), NonFinite> {
        let n = sys.n;
        let x = |i: usize| &u[BLOCK * i..BLOCK * i + BLOCK];
        let mut bad = FirstNonFinite::default();
        let mut blocks = [zero_block::<BLOCK>(); 3];
        let mut here: CellProps<N> = sys.props_at(0, x(0));
        let top: FaceFlux<M> = sys.top_face(t, &here);
        let mut above: [Dual<M>; R] = rows_of(top.totals());
        for i in 0..n {
            let (below, next): ([Dual<M>; R], Option<CellProps<N>>) = if i + 1 < n {
                let next: CellProps<N> = sys.props_at(i + 1, x(i + 1));
                let f: FaceFlux<M> = sys.interior_face(&here, &next, i + 1);
                (rows_of(f.totals()), Some(next))
            } else {
                let f: FaceFlux<M> = sys.bottom_face(t, &here);
                (rows_of(f.totals()), None)
            };
            let kept = KeptCell::of(&here);
            jacobian_row(
                sys,
                i,
                c,
                &kept,
                x(i),
                [&above, &below],
                sources,
                &mut blocks,
            );
            if let Some(out) = storage.as_deref_mut() {
                out.set_diag(i, &storage_block(sys, i, &kept));
            }
            bad.check(i, &blocks);
            jac.set_row(i, &blocks[0], &blocks[1], &blocks[2]);
            above = below;
            if let Some(next) = next {
                here = next;
            }
        }
        bad.result()
    }

    /// From the cells' states of the last evaluation (which hold the unknowns exactly);
    /// Newton takes them from [`Kept::jacobian_into`]'s pass instead.
    fn storage_blocks_into(&self, sys: &System, out: &mut dyn BlockRows<BLOCK>) {
        for i in 0..sys.n {
            let v = &sys.cells[i];
            let cp: CellProps<N> = sys.props_at(i, &[v.t.v, v.h.v, v.rv.v]);
            out.set_diag(i, &storage_block(sys, i, &KeptCell::of(&cp)));
        }
    }

    fn arrays(&self, _out: &mut Vec<crate::memory::ArrayCost>) {}
}

/// Jacobian block row `i` (lower, diagonal, upper block) of the residual of
/// [`System::assemble`] with coefficient `c`, from the cell's record with derivatives
/// `cp` made at its state `x` and the totals with derivatives of its faces above and
/// below (`faces`), with `sources(i, diag)` (when given) adding the derivatives of the
/// cell's source terms last. Each entry sums, in this order, the cell's storage and
/// local terms, the face above, the face below and the sources.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn jacobian_row<const N: usize, const M: usize, const R: usize>(
    sys: &System,
    i: usize,
    c: f64,
    cp: &KeptCell<N>,
    x: &[f64],
    faces: [&[Dual<M>; R]; 2],
    sources: Option<&SourceJacobian>,
    blocks: &mut [Block<BLOCK>; 3],
) {
    let n = sys.n;
    let rate = sys.kinetic_rate();
    let rows = if rate.is_some() { BLOCK } else { BLOCK - 1 };
    *blocks = [zero_block::<BLOCK>(); 3];
    let w = sys.widths[i];
    let d = &mut blocks[1];
    let energy = cp.energy * (c * w);
    let water = cp.water * (c * w);
    for col in 0..N {
        d[ENERGY][col] += energy.d[col];
        d[WATER][col] += water.d[col];
    }
    match rate {
        Some(b) => {
            let rv = cp.rv(x, N > RV);
            let vapor = cp.vapor * (c * w) - (cp.rveq - rv) * (b * w);
            for col in 0..N {
                d[VAPOR][col] += vapor.d[col];
            }
        }
        None => {
            // rv − rveq(T, h): 1 for the vapour unknown, −∂rveq for T and h.
            for col in 0..N {
                d[VAPOR][col] -= cp.rveq.d[col];
            }
            d[VAPOR][RV] += 1.0;
        }
    }
    // Face i (above the cell: its flow leaves the row, sign −1), then face i + 1
    // (below: +1); a face's derivatives are w.r.t. the cell above it (slots 0..N) and
    // below it (N..2N), the boundary faces' both w.r.t. their cell.
    for (vals, (j, sign)) in faces.into_iter().zip([(i, -1.0), (i + 1, 1.0)]) {
        let col_up = if j == 0 { 0 } else { j - 1 };
        let col_dn = if j == n { n - 1 } else { j };
        // 0: lower, 1: diagonal, 2: upper block of row i.
        let (ku, kd) = (col_up + 1 - i, col_dn + 1 - i);
        for (r, v) in vals.iter().enumerate().take(rows) {
            for col in 0..N {
                blocks[ku][r][col] += sign * v.d[col];
            }
            for col in 0..N {
                blocks[kd][r][col] += sign * v.d[N + col];
            }
        }
    }
    if let Some(add) = sources {
        add(i, &mut blocks[1]);
    }
}

/// The first non-finite entry of a Jacobian: the first in a lower block, else in a
/// diagonal, else in an upper one (by block row, then row).
#[derive(Default)]
struct FirstNonFinite([Option<NonFinite>; 3]);

impl FirstNonFinite {
    #[inline(always)]
    fn check(&mut self, i: usize, blocks: &[Block<BLOCK>; 3]) {
        for (k, b) in blocks.iter().enumerate() {
            if self.0[k].is_none() {
                if let Some(row) = b.iter().position(|r| !super::all_finite(r)) {
                    self.0[k] = Some(NonFinite { cell: i, row });
                }
            }
        }
    }

    fn result(self) -> Result<(), NonFinite> {
        match self.0.into_iter().flatten().next() {
            Some(e) => Err(e),
            None => Ok(()),
        }
    }
}

/// Cell i's storage-derivative block from its record with derivatives `cp`.
#[inline(always)]
fn storage_block<const N: usize>(sys: &System, i: usize, cp: &KeptCell<N>) -> Block<BLOCK> {
    let w = sys.widths[i];
    let mut b = zero_block();
    let rows = [cp.energy, cp.water, cp.vapor];
    let used = if sys.kinetic_rate().is_some() {
        BLOCK
    } else {
        BLOCK - 1
    };
    for (r, row) in rows.iter().enumerate().take(used) {
        for col in 0..N {
            b[r][col] = w * row.d[col];
        }
    }
    b
}

/// The values of a face's totals (NaN for those not kept).
#[inline]
fn value_totals<const M: usize, const R: usize>(t: &[Dual<M>; R]) -> [Dual<0>; BLOCK] {
    std::array::from_fn(|k| t.get(k).map_or(Dual::cst(f64::NAN), |t| t.value_only()))
}

/// The first `R` of a face's totals (see [`Derivs`]).
#[inline]
fn rows_of<const M: usize, const R: usize>(t: [Dual<M>; BLOCK]) -> [Dual<M>; R] {
    std::array::from_fn(|k| t[k])
}
