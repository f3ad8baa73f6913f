//! Fluxes at a face between two points (cells or a cell and a boundary ghost point),
//! positive downward. Face values are `Dual<M>` with M = 2N: slots 0..N belong to the
//! upper point, slots N..2N to the lower one (N = 3: T, h, rv in kinetic mode; N = 2: T, h
//! in equilibrium mode).

use super::cell::{vapor_enthalpy, CellProps};
use super::dual::Dual;
use crate::props::conductivity::FaceAveraging;
use crate::props::constants::{T_REF, WATER_DENSITY, WATER_HEAT_CAPACITY};

/// The parts of the fluxes through one face.
#[derive(Debug, Clone, Copy)]
pub struct FaceFlux<const M: usize = 6> {
    /// Liquid flux, isothermal part −K(∂h/∂z − 1) [m s⁻¹].
    pub liquid_iso: Dual<M>,
    /// Liquid flux, thermal part −K G h (σ'/σ) ∂T/∂z [m s⁻¹].
    pub liquid_th: Dual<M>,
    /// Vapour flux, isothermal part (what is left of jv after the thermal part) [kg m⁻² s⁻¹].
    pub vapor_iso: Dual<M>,
    /// Vapour flux, thermal part −η Dv hr (drvs/dT) ∂T/∂z [kg m⁻² s⁻¹].
    pub vapor_th: Dual<M>,
    /// Heat conduction −λ ∂T/∂z [W m⁻²].
    pub conduction: Dual<M>,
    /// Face temperature [K] (for the advected enthalpies).
    pub t_face: Dual<M>,
    /// Magnitude of the largest terms that make up the water and energy fluxes
    /// [kg m⁻² s⁻¹], [W m⁻²]: the scale against which round-off is judged.
    pub scale_water: f64,
    pub scale_energy: f64,
    /// Size of the operands whose differences make the water and energy fluxes
    /// [kg m⁻² s⁻¹], [W m⁻²] (e.g. λ(|Ta| + |Tb|)/Δz): times the machine epsilon, the
    /// round-off that no Newton iteration can remove.
    pub operands_water: f64,
    pub operands_energy: f64,
}

impl<const M: usize> FaceFlux<M> {
    pub fn zero() -> Self {
        let z = Dual::cst(0.0);
        FaceFlux {
            liquid_iso: z,
            liquid_th: z,
            vapor_iso: z,
            vapor_th: z,
            conduction: z,
            t_face: z,
            scale_water: 0.0,
            scale_energy: 0.0,
            operands_water: 0.0,
            operands_energy: 0.0,
        }
    }
    /// Total vapour flux jv [kg m⁻² s⁻¹].
    #[inline]
    pub fn vapor(&self) -> Dual<M> {
        self.vapor_iso + self.vapor_th
    }
    /// Total liquid flux ql [m s⁻¹].
    #[inline]
    pub fn liquid(&self) -> Dual<M> {
        self.liquid_iso + self.liquid_th
    }
    /// Total water mass flux ρw ql + jv [kg m⁻² s⁻¹].
    #[inline]
    pub fn water(&self) -> Dual<M> {
        self.liquid() * WATER_DENSITY + self.vapor()
    }
    /// The totals [energy, water, vapour] (the residual's face terms).
    #[inline]
    pub fn totals(&self) -> [Dual<M>; 3] {
        [self.energy(), self.water(), self.vapor()]
    }
    /// Total energy flux −λ∂T/∂z + ρw cw ql (T − T0) + jv (L0 + cv (T − T0)) [W m⁻²].
    #[inline]
    pub fn energy(&self) -> Dual<M> {
        let dt0 = self.t_face - T_REF;
        self.conduction
            + self.liquid() * dt0 * (WATER_DENSITY * WATER_HEAT_CAPACITY)
            + self.vapor() * vapor_enthalpy(self.t_face)
    }
}

/// Distance-weighted linear interpolation to the face, wa·a + wb·b, with the weights
/// wa = db/(da + db) and wb = da/(da + db) computed once per face.
#[inline]
fn interp<const M: usize>(a: Dual<M>, b: Dual<M>, wa: f64, wb: f64) -> Dual<M> {
    a * wa + b * wb
}

/// Distance-weighted harmonic mean (series conductance) dz/(da/a + db/b); 0 when either is 0.
#[inline]
fn harmonic<const M: usize>(a: Dual<M>, b: Dual<M>, da: f64, db: f64) -> Dual<M> {
    // A ghost point on the face itself (zero distance) adds no resistance.
    if da == 0.0 {
        return b;
    }
    if db == 0.0 {
        return a;
    }
    let den = a * db + b * da;
    if den.v <= 0.0 || a.v <= 0.0 || b.v <= 0.0 {
        // A zero conductance on either side closes the face; keep the derivative of the
        // product so Newton sees it re-open.
        if den.v > 0.0 {
            return a * b * (da + db) / den;
        }
        return Dual::cst(0.0);
    }
    a * b * (da + db) / den
}

/// Half-width of the band of driving gradient |∂h/∂z − 1| [-] over which upstream
/// weighting blends the two cells' conductivities.
pub const UPSTREAM_BAND: f64 = 1e-3;

/// Smallest conductivity used inside logarithms [m s⁻¹] (far below any physical value).
const K_FLOOR: f64 = 1e-300;

/// Fluxes between `up` (distance `da` above the face) and `lo` (distance `db` below);
/// `off_up` and `off_lo` are the dual slot offsets of the two points (0 or 3).
pub fn face_flux<const N: usize, const M: usize>(
    up: &CellProps<N>,
    lo: &CellProps<N>,
    off_up: usize,
    off_lo: usize,
    da: f64,
    db: f64,
    averaging: FaceAveraging,
) -> FaceFlux<M> {
    let l = |x: Dual<N>, off: usize| -> Dual<M> { Dual::lift(x, off) };
    let dz = da + db;
    let inv_dz = 1.0 / dz;
    let (wa, wb) = (db * inv_dz, da * inv_dz);
    let (ta, tb) = (l(up.t, off_up), l(lo.t, off_lo));
    let grad_t = (tb - ta) * inv_dz;
    let grad_h = (l(lo.h, off_lo) - l(up.h, off_up)) * inv_dz;
    let grad_rv = (l(lo.rv, off_lo) - l(up.rv, off_up)) * inv_dz;

    let (ka, kb) = (l(up.k, off_up), l(lo.k, off_lo));
    let drive = grad_h - 1.0;
    let k_face = match averaging {
        FaceAveraging::Arithmetic => interp(ka, kb, wa, wb),
        FaceAveraging::Harmonic => harmonic(ka, kb, da, db),
        FaceAveraging::Geometric => {
            let la = ka.max(Dual::cst(K_FLOOR)).ln();
            let lb = kb.max(Dual::cst(K_FLOOR)).ln();
            interp(la, lb, wa, wb).exp()
        }
        FaceAveraging::Upstream => {
            // The upper cell's K for downward flow (drive < 0), the lower's for upward;
            // blended smoothly over |∂h/∂z − 1| < UPSTREAM_BAND, where the flux is near zero
            // anyway, so Newton does not cycle when the flow direction flips.
            let x = drive.v / UPSTREAM_BAND;
            if x <= -1.0 {
                ka
            } else if x >= 1.0 {
                kb
            } else {
                // w = weight of the lower cell, smoothstep in x ∈ (−1, 1).
                let s = (drive / UPSTREAM_BAND + 1.0) * 0.5;
                let w = s * s * (3.0 - s * 2.0);
                ka + (kb - ka) * w
            }
        }
    };
    let liquid_iso = -(k_face * drive);
    let kt_face = interp(l(up.kt, off_up), l(lo.kt, off_lo), wa, wb);
    let liquid_th = if kt_face.v == 0.0 && kt_face.d.iter().all(|x| *x == 0.0) {
        Dual::cst(0.0)
    } else {
        -(k_face * kt_face * grad_t)
    };

    let dv = harmonic(l(up.dv, off_up), l(lo.dv, off_lo), da, db);
    let eta = interp(l(up.eta, off_up), l(lo.eta, off_lo), wa, wb);
    let hr = interp(l(up.hr, off_up), l(lo.hr, off_lo), wa, wb);
    let drvs = interp(l(up.drvs, off_up), l(lo.drvs, off_lo), wa, wb);
    let thermal_gradient_flux = dv * hr * drvs * grad_t;
    // jv = −Dv ∂rv/∂z − (η − 1) Dv hr (drvs/dT) ∂T/∂z
    let jv = -(dv * grad_rv) - (eta - 1.0) * thermal_gradient_flux;
    let vapor_th = -(eta * thermal_gradient_flux);
    let vapor_iso = jv - vapor_th;

    let lambda = harmonic(l(up.lambda, off_up), l(lo.lambda, off_lo), da, db);
    let conduction = -(lambda * grad_t);
    let t_face = interp(ta, tb, wa, wb);
    let scale_water = WATER_DENSITY * (k_face.v * (grad_h.v.abs() + 1.0) + liquid_th.v.abs())
        + (dv.v * grad_rv.v).abs()
        + (eta.v * thermal_gradient_flux.v).abs();
    let scale_energy = conduction.v.abs()
        + scale_water * (WATER_HEAT_CAPACITY * (t_face.v - T_REF).abs() + vapor_enthalpy(t_face).v);
    let operands_water = WATER_DENSITY * k_face.v * (up.h.v.abs() + lo.h.v.abs() + dz) * inv_dz
        + dv.v * (up.rv.v.abs() + lo.rv.v.abs()) * inv_dz;
    let operands_energy = lambda.v * (ta.v.abs() + tb.v.abs()) * inv_dz
        + operands_water * (WATER_HEAT_CAPACITY * t_face.v.abs() + vapor_enthalpy(t_face).v);
    FaceFlux {
        liquid_iso,
        liquid_th,
        vapor_iso,
        vapor_th,
        conduction,
        t_face,
        scale_water,
        scale_energy,
        operands_water,
        operands_energy,
    }
}

impl<const M: usize> FaceFlux<M> {
    /// The values alone (what the residual-only path computes).
    pub fn values(&self) -> FaceFlux<0> {
        FaceFlux {
            liquid_iso: self.liquid_iso.value_only(),
            liquid_th: self.liquid_th.value_only(),
            vapor_iso: self.vapor_iso.value_only(),
            vapor_th: self.vapor_th.value_only(),
            conduction: self.conduction.value_only(),
            t_face: self.t_face.value_only(),
            scale_water: self.scale_water,
            scale_energy: self.scale_energy,
            operands_water: self.operands_water,
            operands_energy: self.operands_energy,
        }
    }
}
