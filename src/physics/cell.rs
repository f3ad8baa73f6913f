//! Per-cell material state: every property the residual needs, as `Dual<N>` values with
//! derivatives with respect to the cell's own (T, h, rv) (N = 3, kinetic mode) or (T, h)
//! (N = 2, equilibrium mode, where rv = rveq(T, h)), or as `Dual<0>` (values only) on the
//! residual-only path. All paths run the same code, so their values agree bitwise.

use super::dual::Dual;
use crate::model::{Physics, Soil, VaporMode};
use crate::props::constants::{
    GAS_CONSTANT, GRAVITY, LATENT_HEAT_T0, MOLAR_MASS_WATER, T_REF, VAPOR_HEAT_CAPACITY,
    WATER_DENSITY, WATER_HEAT_CAPACITY,
};
use crate::props::{conductivity, vapor, water};

/// Properties of one cell (or of a boundary "ghost" point), all per unit bulk volume.
#[derive(Debug, Clone, Copy)]
pub struct CellProps<const N: usize = 3> {
    pub t: Dual<N>,
    pub h: Dual<N>,
    pub rv: Dual<N>,
    /// Liquid content θl [m³ m⁻³] and air-filled porosity θa.
    pub theta: Dual<N>,
    pub theta_a: Dual<N>,
    /// Kelvin relative humidity hr(h, T) [-].
    pub hr: Dual<N>,
    /// Saturated vapour density and its temperature derivative [kg m⁻³], [kg m⁻³ K⁻¹].
    pub rvs: Dual<N>,
    pub drvs: Dual<N>,
    /// Equilibrium vapour density hr·rvs [kg m⁻³].
    pub rveq: Dual<N>,
    /// Hydraulic conductivity K(h, T) [m s⁻¹].
    pub k: Dual<N>,
    /// Thermal liquid coefficient G·h·(dσ/dT)/σ [m K⁻¹] (0 when disabled).
    pub kt: Dual<N>,
    /// Effective vapour diffusivity Dv = τ θa Da [m² s⁻¹].
    pub dv: Dual<N>,
    /// Enhancement factor η [-].
    pub eta: Dual<N>,
    /// Thermal conductivity λ [W m⁻¹ K⁻¹].
    pub lambda: Dual<N>,
    /// Storages per bulk volume: energy e [J m⁻³], total water [kg m⁻³], vapour [kg m⁻³].
    pub energy: Dual<N>,
    pub water: Dual<N>,
    pub vapor: Dual<N>,
}

/// Surface tension log-slope s = (dσ/dT)/σ [K⁻¹] with ds/dT, from the IAPWS (2014)
/// correlation σ = B τ^μ (1 + b τ), τ = 1 − T/Tc.
fn surface_tension_log_slope<const N: usize>(t: Dual<N>) -> Dual<N> {
    const TC: f64 = 647.096;
    const MU: f64 = 1.256;
    const B_SMALL: f64 = -0.625;
    let tau = 1.0 - t / TC;
    // d ln σ/dT = −(1/Tc) [μ/τ + b/(1 + bτ)]
    let term = MU / tau + B_SMALL / (tau * B_SMALL + 1.0);
    term * (-1.0 / TC)
}

/// Specific enthalpy of vapour relative to liquid water at T0: L0 + cv (T − T0) [J kg⁻¹].
#[inline]
pub fn vapor_enthalpy<const N: usize>(t: Dual<N>) -> Dual<N> {
    (t - T_REF) * VAPOR_HEAT_CAPACITY + LATENT_HEAT_T0
}

/// Equilibrium relative humidity and vapour density at (T, h) as duals.
#[allow(clippy::type_complexity)]
pub fn equilibrium_vapor<const N: usize>(
    t: Dual<N>,
    h: Dual<N>,
) -> (Dual<N>, Dual<N>, Dual<N>, Dual<N>) {
    let (hr, dhr_dh, dhr_dt) = water::relative_humidity(h.v, t.v);
    let mut hr_d = [0.0; N];
    for (k, x) in hr_d.iter_mut().enumerate() {
        *x = dhr_dh * h.d[k] + dhr_dt * t.d[k];
    }
    let hr = Dual { v: hr, d: hr_d };
    // Without derivative slots (the residual-only path) d²rvs/dT² is not needed.
    let (s0, s1, s2) = if N == 0 {
        let (s0, s1) = water::saturated_vapor_density_d1(t.v);
        (s0, s1, 0.0)
    } else {
        water::saturated_vapor_density(t.v)
    };
    let rvs = t.chain(s0, s1);
    let drvs = t.chain(s1, s2);
    (hr, rvs, drvs, hr * rvs)
}

/// Head in equilibrium with relative humidity `rh` at temperature `t` (inverse Kelvin):
/// h = R T ln(rh)/(g Mw) [m].
pub fn head_from_rh<const N: usize>(rh: f64, t: Dual<N>) -> Dual<N> {
    t * (GAS_CONSTANT * rh.ln() / (GRAVITY * MOLAR_MASS_WATER))
}

/// Evaluates every property of a cell of `soil` at state (t, h, rv).
///
/// `osmotic` [m] is the osmotic head of the pore water (≤ 0; 0 for pure water): it lowers
/// the Kelvin relative humidity, hr = exp(g Mw (h + osmotic)/(R T)), and nothing else
/// (the liquid flow is driven by the matric head alone: no membrane effect, reflection
/// coefficient 0). It is a constant within a flow step (see `crate::solute`).
///
/// `width` [m] > 0: the liquid content is the cell average over a hydrostatic head
/// profile within a cell of that width ([`crate::props::retention::Retention::cell_average_theta`]),
/// and everything that depends on θ (air content, vapour storage, λ, η) follows it; the
/// conductivity and the humidity stay those of the centre head. 0: θ at the centre head.
#[allow(clippy::too_many_arguments)]
pub fn cell_props<const N: usize>(
    soil: &Soil,
    physics: &Physics,
    t: Dual<N>,
    h: Dual<N>,
    rv: Dual<N>,
    osmotic: f64,
    width: f64,
) -> CellProps<N> {
    let phi = soil.retention.theta_s();
    let ((th, dth), (kr, dkr)) = if width > 0.0 {
        (
            soil.retention.cell_average_theta(h.v, width),
            soil.retention.relative_conductivity(h.v),
        )
    } else {
        soil.retention.theta_and_relative_conductivity(h.v)
    };
    let theta = h.chain(th, dth);
    let theta_a = (-theta + phi).max(Dual::cst(0.0));
    let (hr, rvs, drvs, rveq) = equilibrium_vapor(t, h + osmotic);
    // In equilibrium the vapour density is rveq(T, h) itself (the `rv` given is ignored):
    // the physics then depends on T and h alone, and the algebraic vapour row of the
    // system decouples (see `System::assemble`).
    let rv = match physics.vapor_mode {
        VaporMode::Equilibrium => rveq,
        VaporMode::Kinetic { .. } => rv,
    };

    let mut k = h.chain(kr, dkr) * soil.saturated_conductivity;
    if physics.viscosity_correction {
        let (f, df) = conductivity::viscosity_factor(t.v, physics.reference_temperature);
        k = k * t.chain(f, df);
    }
    let kt = match physics.thermal_liquid_gain {
        Some(g) => h * surface_tension_log_slope(t) * g,
        None => Dual::cst(0.0),
    };

    let (da, dda) = physics.diffusivity.value(t.v, physics.air_pressure);
    let (tau, dtau) = vapor::tortuosity(theta_a.v, phi);
    let dv = theta_a.chain(tau, dtau) * theta_a * t.chain(da, dda);

    let (eta, deta) = soil.enhancement.value(theta.v, phi);
    let eta = theta.chain(eta, deta);
    let (lam, dlam) = soil.thermal.value(theta.v, phi);
    let lambda = theta.chain(lam, dlam);

    // Stored liquid: θ plus the specific storage of positive heads (a saturated cell
    // stores θs + Ss·h), in the water and the energy storage; θ itself (and so the air
    // content, K, λ) is the retention curve's.
    let stored = if soil.specific_storage > 0.0 && h.v > 0.0 {
        theta + h * soil.specific_storage
    } else {
        theta
    };
    let dt0 = t - T_REF;
    let vapor_store = theta_a * rv;
    let energy = dt0 * soil.solid_heat_capacity
        + stored * dt0 * (WATER_DENSITY * WATER_HEAT_CAPACITY)
        + vapor_store * vapor_enthalpy(t);
    let water = stored * WATER_DENSITY + vapor_store;
    CellProps {
        t,
        h,
        rv,
        theta,
        theta_a,
        hr,
        rvs,
        drvs,
        rveq,
        k,
        kt,
        dv,
        eta,
        lambda,
        energy,
        water,
        vapor: vapor_store,
    }
}

impl<const N: usize> CellProps<N> {
    /// Every property NaN: a placeholder, never read as a value.
    #[inline]
    pub fn undefined() -> Self {
        let x = Dual::cst(f64::NAN);
        CellProps {
            t: x,
            h: x,
            rv: x,
            theta: x,
            theta_a: x,
            hr: x,
            rvs: x,
            drvs: x,
            rveq: x,
            k: x,
            kt: x,
            dv: x,
            eta: x,
            lambda: x,
            energy: x,
            water: x,
            vapor: x,
        }
    }
}

/// What the column keeps of each cell's last evaluation (`System::cells`): the unknowns
/// and what the cell's own rows, the step's error test and the results read. 8 values
/// (64 B) instead of the 17 of a whole record: the properties only faces read are
/// evaluated where a face needs them, and dropped after it (see `System::evaluate`).
#[derive(Debug, Clone, Copy)]
pub struct CellValues {
    pub t: Dual<0>,
    pub h: Dual<0>,
    pub rv: Dual<0>,
    /// Liquid content θl [m³ m⁻³].
    pub theta: Dual<0>,
    /// Equilibrium vapour density hr·rvs [kg m⁻³].
    pub rveq: Dual<0>,
    /// Storages per bulk volume: energy e [J m⁻³], total water [kg m⁻³], vapour [kg m⁻³].
    pub energy: Dual<0>,
    pub water: Dual<0>,
    pub vapor: Dual<0>,
}

impl<const N: usize> CellProps<N> {
    /// What the column keeps of this record (its values, see [`CellValues`]).
    #[inline]
    pub fn kept_values(&self) -> CellValues {
        CellValues {
            t: self.t.value_only(),
            h: self.h.value_only(),
            rv: self.rv.value_only(),
            theta: self.theta.value_only(),
            rveq: self.rveq.value_only(),
            energy: self.energy.value_only(),
            water: self.water.value_only(),
            vapor: self.vapor.value_only(),
        }
    }
}

/// What a cell keeps of its evaluation with derivatives as the base of linearised
/// evaluations (`crate::physics::derivs`): the properties its own rows and the step's
/// error test read — liquid content, equilibrium vapour density and the three storages
/// — with their derivatives. The properties only faces read (conductivities,
/// diffusivity, humidity…) are not kept: a cell is linearised only where both its faces
/// are (a face evaluated afresh evaluates both its cells directly), so no face reads a
/// linearised cell. 5 duals instead of the 17 of the whole record (equilibrium mode:
/// 120 B instead of 408 B per cell).
#[derive(Debug, Clone, Copy)]
pub struct KeptCell<const N: usize> {
    pub theta: Dual<N>,
    pub rveq: Dual<N>,
    pub energy: Dual<N>,
    pub water: Dual<N>,
    pub vapor: Dual<N>,
}

impl<const N: usize> KeptCell<N> {
    /// What `c` keeps.
    #[inline]
    pub fn of(c: &CellProps<N>) -> Self {
        KeptCell {
            theta: c.theta,
            rveq: c.rveq,
            energy: c.energy,
            water: c.water,
            vapor: c.vapor,
        }
    }

    /// The vapour density as a dual at the base state `x0` (T, h, rv): the unknown of
    /// slot 2 where it is one (`with_rv`, kinetic mode), else rveq.
    #[inline]
    pub fn rv(&self, x0: &[f64], with_rv: bool) -> Dual<N> {
        if with_rv {
            Dual::var(x0[2], 2)
        } else {
            self.rveq
        }
    }

    /// The kept properties at the state (t, h, rv), displaced by `du` (the first N of t,
    /// h, rv) from the base state of this record, to first order; the unknowns
    /// themselves exactly (`rv`: None where it is not an unknown, equilibrium mode, and
    /// then rveq linearised).
    #[inline(always)]
    pub fn taylor(&self, t: f64, h: f64, rv: Option<f64>, du: &[f64; N]) -> CellValues {
        let rveq = self.rveq.taylor(du);
        CellValues {
            t: Dual::cst(t),
            h: Dual::cst(h),
            rv: rv.map_or(rveq, Dual::cst),
            theta: self.theta.taylor(du),
            rveq,
            energy: self.energy.taylor(du),
            water: self.water.taylor(du),
            vapor: self.vapor.taylor(du),
        }
    }
}

/// The properties of a cell that only its faces read, with derivatives, kept beside its
/// [`KeptCell`] where the flux parts of linearised faces are asked for at every step
/// (solute transport): a face between cells near their bases then gets its parts from
/// their linearised records instead of two direct evaluations. 9 duals (equilibrium
/// mode: 216 B per cell), held only by such runs.
#[derive(Debug, Clone, Copy)]
pub struct FaceInputs<const N: usize> {
    pub theta_a: Dual<N>,
    pub hr: Dual<N>,
    pub rvs: Dual<N>,
    pub drvs: Dual<N>,
    pub k: Dual<N>,
    pub kt: Dual<N>,
    pub dv: Dual<N>,
    pub eta: Dual<N>,
    pub lambda: Dual<N>,
}

impl<const N: usize> FaceInputs<N> {
    /// What `c` keeps for its faces.
    #[inline]
    pub fn of(c: &CellProps<N>) -> Self {
        FaceInputs {
            theta_a: c.theta_a,
            hr: c.hr,
            rvs: c.rvs,
            drvs: c.drvs,
            k: c.k,
            kt: c.kt,
            dv: c.dv,
            eta: c.eta,
            lambda: c.lambda,
        }
    }

    /// The whole record at the state (t, h, rv), displaced by `du` from the base state of
    /// `kept` and this record, to first order (the kept properties and the unknowns as
    /// [`KeptCell::taylor`] gives them).
    #[inline]
    pub fn whole(
        &self,
        kept: &KeptCell<N>,
        t: f64,
        h: f64,
        rv: Option<f64>,
        du: &[f64; N],
    ) -> CellProps<0> {
        let v = kept.taylor(t, h, rv, du);
        CellProps {
            t: v.t,
            h: v.h,
            rv: v.rv,
            theta: v.theta,
            theta_a: self.theta_a.taylor(du),
            hr: self.hr.taylor(du),
            rvs: self.rvs.taylor(du),
            drvs: self.drvs.taylor(du),
            rveq: v.rveq,
            k: self.k.taylor(du),
            kt: self.kt.taylor(du),
            dv: self.dv.taylor(du),
            eta: self.eta.taylor(du),
            lambda: self.lambda.taylor(du),
            energy: v.energy,
            water: v.water,
            vapor: v.vapor,
        }
    }
}
