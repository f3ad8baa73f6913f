//! Boundary faces. Each boundary is a face between the adjacent cell and a "ghost" point
//! on the face itself (zero distance) that carries the boundary values; the ghost may
//! depend on the adjacent cell (e.g. its temperature under a heat-flux condition), and its
//! derivatives are then folded into that cell's Jacobian block.

use super::cell::{cell_props, equilibrium_vapor, head_from_rh, CellProps};
use super::dual::Dual;
use super::flux::{face_flux, FaceFlux};
use super::System;
use crate::model::{BottomHeat, BottomWater, SurfaceHeat, SurfaceWater};
use crate::schedule::Schedule;

impl System {
    fn ghost<const N: usize>(
        &self,
        cell: usize,
        t: Dual<N>,
        h: Dual<N>,
        rv: Option<Dual<N>>,
    ) -> CellProps<N> {
        let rv = rv.unwrap_or_else(|| equilibrium_vapor(t, h).3);
        // The boundary points hold pure water (no osmotic head).
        cell_props(self.soil_of(cell), &self.physics, t, h, rv, 0.0, 0.0)
    }

    /// Fluxes through the land surface (face 0) given the top cell's properties `c0`,
    /// positive downward (into the soil), for a step ending at `t`.
    ///
    /// The forcing is taken at the left limit of `t` (the schedules' values and the
    /// period in force just before it): the stepper lands on every jump of the forcing,
    /// so a step ending on a jump belongs to the value before it, and the water a
    /// stepped schedule applies is integrated exactly (a flood of a few days after a
    /// step of years gets the days, not the years).
    pub fn top_face<const N: usize, const M: usize>(
        &self,
        t: f64,
        c0: &CellProps<N>,
    ) -> FaceFlux<M> {
        let t = t.next_down();
        let bc = self.surface.at(t);
        let c0 = *c0;
        let d0 = self.d_above(0);
        let avg = self.physics.face_conductivity;
        let (tg, heat_flux) = match &bc.heat {
            SurfaceHeat::Temperature(s) => (Dual::cst(s.value(t)), None),
            SurfaceHeat::Flux(s) => (c0.t, Some(s.value(t))),
        };
        let mut f = match &bc.water {
            SurfaceWater::Head(s) => {
                let g = self.ghost(0, tg, Dual::cst(s.value(t)), None);
                face_flux(&g, &c0, 0, N, 0.0, d0, avg)
            }
            SurfaceWater::Atmosphere {
                relative_humidity,
                resistance,
            } => self.air_exchange(
                t,
                tg,
                &c0,
                relative_humidity,
                resistance.as_ref(),
                // A pond left from a ponding period evaporates here too (such a case
                // gives every period open to the air a resistance).
                self.surface_store,
            ),
            SurfaceWater::Pond { inflow, air, .. } => {
                let mut f = match air {
                    Some((rh, resistance)) => {
                        self.air_exchange(t, tg, &c0, rh, Some(resistance), true)
                    }
                    None => {
                        let g = self.ghost(0, tg, c0.h, Some(c0.rv));
                        let mut f = face_flux(&g, &c0, 0, N, 0.0, d0, avg);
                        zero_water(&mut f);
                        f
                    }
                };
                // All the water applied enters the surface store (the top cell with its
                // pond); what the soil does not take stays in the pond.
                f.liquid_iso = Dual::cst(inflow.value(t).max(0.0));
                f
            }
            SurfaceWater::Flux { flux, ponding_head } => {
                let g = self.ghost(0, tg, Dual::cst(*ponding_head), None);
                let mut f = face_flux(&g, &c0, 0, N, 0.0, d0, avg);
                let q = flux.value(t);
                // Infiltration cannot exceed what the soil takes with the surface ponded.
                let capacity = f.liquid_iso;
                f.liquid_iso = if q <= capacity.v {
                    Dual::cst(q)
                } else {
                    capacity
                };
                f.liquid_th = Dual::cst(0.0);
                f.vapor_iso = Dual::cst(0.0);
                f.vapor_th = Dual::cst(0.0);
                f
            }
            SurfaceWater::NoFlow => {
                let g = self.ghost(0, tg, c0.h, Some(c0.rv));
                let mut f = face_flux(&g, &c0, 0, N, 0.0, d0, avg);
                zero_water(&mut f);
                f
            }
        };
        if let Some(q) = heat_flux {
            f.conduction = Dual::cst(q);
        }
        f
    }

    /// Vapour exchange between the top cell and air of relative humidity `rh(t)` at the
    /// surface temperature `tg` (no liquid flux), either with the air's vapour density
    /// fixed at the surface or through a boundary-layer resistance [s m⁻¹].
    ///
    /// With `pond` (a ponding surface), standing water evaporates through the resistance
    /// alone, jv = −(ρv0 − ρv,a)/ra, ρv0 being the top cell's vapour density (saturated at
    /// its temperature: the pond is part of its storage), while bare soil exchanges
    /// through the resistance and the top half-cell in series. The two fluxes are blended
    /// by the pond's turn-on weight w = dP/dx ∈ [0, 1] over the 1 mm band of the pond's
    /// storage ([`super::pond_weight`]), so the flux has no jump where a pond appears.
    fn air_exchange<const N: usize, const M: usize>(
        &self,
        t: f64,
        tg: Dual<N>,
        c0: &CellProps<N>,
        rh: &Schedule,
        resistance: Option<&Schedule>,
        pond: bool,
    ) -> FaceFlux<M> {
        let c0 = *c0;
        let d0 = self.d_above(0);
        let rh = rh.value(t);
        let g = self.ghost(0, tg, head_from_rh(rh, tg), None);
        let mut f = face_flux(&g, &c0, 0, N, 0.0, d0, self.physics.face_conductivity);
        f.liquid_iso = Dual::cst(0.0);
        f.liquid_th = Dual::cst(0.0);
        if let Some(r) = resistance {
            let ra = r.value(t).max(0.0);
            // jv = −(rv0 − rva)/(ra + d0/Dv0): air-side and soil-side resistances
            // in series; reported as isothermal.
            let rv0 = Dual::lift(c0.rv, N);
            let rva = Dual::lift(g.rv, 0);
            let dv0 = Dual::lift(c0.dv, N);
            let total = if dv0.v > 0.0 {
                (dv0.recip() * d0) + ra
            } else {
                Dual::cst(f64::INFINITY)
            };
            f.vapor_iso = if total.v.is_finite() {
                -((rv0 - rva) / total)
            } else {
                Dual::cst(0.0)
            };
            f.vapor_th = Dual::cst(0.0);
            if pond {
                let (w, dw) = super::pond_weight(c0.h.v - self.d_above(0));
                if w > 0.0 {
                    let w = Dual::lift(c0.h.chain(w, dw), N);
                    let ra = ra.max(f64::MIN_POSITIVE);
                    let open = -((rv0 - rva) / ra);
                    f.vapor_iso = open * w + f.vapor_iso * (Dual::cst(1.0) - w);
                    // The open water's terms in the round-off scales.
                    f.scale_water = f.scale_water.max(open.v.abs());
                    f.operands_water = f.operands_water.max((rv0.v.abs() + rva.v.abs()) / ra);
                }
            }
        }
        f
    }

    /// Fluxes through the bottom boundary (face n) given the bottom cell's properties
    /// `cn`, positive downward (out of the column), for a step ending at `t` (forcing at
    /// the left limit of `t`, as at the surface).
    pub fn bottom_face<const N: usize, const M: usize>(
        &self,
        t: f64,
        cn: &CellProps<N>,
    ) -> FaceFlux<M> {
        let t = t.next_down();
        let n = self.n;
        let bc = self.bottom.at(t);
        let cn = *cn;
        let dn = self.d_below(n - 1);
        let avg = self.physics.face_conductivity;
        let (tg, heat_flux) = match &bc.heat {
            BottomHeat::Temperature(s) => (Dual::cst(s.value(t)), None),
            // Geothermal flux is given positive upward; the face flux is positive downward.
            BottomHeat::GeothermalFlux(s) => (cn.t, Some(-s.value(t))),
        };
        let mut f = match &bc.water {
            BottomWater::WaterTable(s) => {
                let g = self.ghost(n - 1, tg, Dual::cst(s.value(t)), None);
                face_flux(&cn, &g, 0, N, dn, 0.0, avg)
            }
            BottomWater::FreeDrainage => {
                let g = self.ghost(n - 1, tg, cn.h, Some(cn.rv));
                let mut f = face_flux(&cn, &g, 0, N, dn, 0.0, avg);
                zero_water(&mut f);
                // Unit gradient: ql = K(h, T) of the bottom cell.
                f.liquid_iso = Dual::lift(cn.k, 0);
                f
            }
            BottomWater::NoFlow => {
                let g = self.ghost(n - 1, tg, cn.h, Some(cn.rv));
                let mut f = face_flux(&cn, &g, 0, N, dn, 0.0, avg);
                zero_water(&mut f);
                f
            }
        };
        if let Some(q) = heat_flux {
            f.conduction = Dual::cst(q);
        }
        f
    }
}

fn zero_water<const M: usize>(f: &mut FaceFlux<M>) {
    let z = Dual::cst(0.0);
    f.liquid_iso = z;
    f.liquid_th = z;
    f.vapor_iso = z;
    f.vapor_th = z;
}
