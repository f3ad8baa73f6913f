//! The exact Jacobian (dual numbers) agrees with central finite differences of the
//! residual on random states from wet to oven-dry, for every vapour mode and boundary
//! condition kind (numerical differentiation; common practice).

mod common;
use common::*;
use deepdry::model::*;
use deepdry::physics::System;
use deepdry::schedule::Schedule;
use deepdry::solve::blocktri::BlockTri;

fn check(model: &Model, seed: u64, label: &str) {
    let mut sys = System::new(model);
    let n = sys.n;
    let mut rng = Rng(seed);
    for trial in 0..4 {
        // Random state: T 5–45 °C, h from −1e-2 to −1e5 m (log-uniform; some cells wet),
        // rv within ±20 % of equilibrium.
        let mut u = vec![0.0; 3 * n];
        for i in 0..n {
            u[3 * i] = 278.15 + 40.0 * rng.next();
            let h = if rng.next() < 0.15 {
                -1e-3 * rng.next()
            } else {
                -(10f64.powf(-2.0 + 7.0 * rng.next()))
            };
            u[3 * i + 1] = h;
        }
        deepdry::run::equilibrate_vapor(&mut u);
        for i in 0..n {
            u[3 * i + 2] *= 0.8 + 0.4 * rng.next();
        }
        let c = 1.0 / (1e3 + 1e7 * rng.next());
        let mut hist = vec![0.0; 3 * n];
        for h in hist.iter_mut() {
            *h = rng.next();
        }
        let t = 0.0;
        let mut res = vec![0.0; 3 * n];
        let mut jac = BlockTri::new(n);
        sys.assemble(t, &u, c, &hist, &mut res, Some(&mut jac))
            .unwrap();
        let mut rp = vec![0.0; 3 * n];
        let mut rm = vec![0.0; 3 * n];
        for col in 0..3 * n {
            let x = u[col];
            let step = match col % 3 {
                0 => 1e-5,
                1 => 1e-6 * x.abs().max(1e-2),
                _ => 1e-6 * x.abs().max(1e-9),
            };
            let mut up = u.clone();
            up[col] = x + step;
            sys.assemble(t, &up, c, &hist, &mut rp, None).unwrap();
            up[col] = x - step;
            sys.assemble(t, &up, c, &hist, &mut rm, None).unwrap();
            let cb = col / 3;
            for rb in cb.saturating_sub(1)..(cb + 2).min(n) {
                for r in 0..3 {
                    let row = 3 * rb + r;
                    let fd = (rp[row] - rm[row]) / (2.0 * step);
                    let an = jac.block_mut(rb, cb)[r * 3 + col % 3];
                    // Scale: the largest entry of that row times the variable step, so a
                    // tiny coupling is judged against what matters for the row.
                    let tol = 1e-5 * (an.abs().max(fd.abs())) + 1e-9 * row_scale(&jac, rb, r);
                    assert!(
                        (an - fd).abs() <= tol,
                        "{label} trial {trial}: d R[{rb},{r}] / d u[{cb},{}]: analytic {an:e}, finite difference {fd:e}",
                        col % 3
                    );
                }
            }
        }
    }
}

fn row_scale(jac: &BlockTri, rb: usize, r: usize) -> f64 {
    let mut m = 0.0f64;
    for b in [&jac.lower[rb], &jac.diag[rb], &jac.upper[rb]] {
        for c in 0..3 {
            m = m.max(b[r * 3 + c].abs());
        }
    }
    m
}

#[test]
fn jacobian_matches_finite_differences_equilibrium() {
    let m = column(
        uniform_mesh(2.0, 8),
        sandy_loam(),
        dry_surface(291.15, 0.2),
        water_table(298.15),
        291.15,
        298.15,
        YEAR,
    );
    check(&m, 1, "equilibrium, atmosphere/water table");
}

#[test]
fn jacobian_matches_finite_differences_kinetic_thermal_liquid() {
    let mut m = column(
        uniform_mesh(2.0, 8),
        sandy_loam(),
        dry_surface(291.15, 0.3),
        water_table(298.15),
        291.15,
        298.15,
        YEAR,
    );
    m.physics.vapor_mode = VaporMode::Kinetic { rate: 1e-2 };
    m.physics.thermal_liquid_gain = Some(7.0);
    m.physics.viscosity_correction = true;
    m.soils[0].enhancement = deepdry::props::vapor::Enhancement::Cass { clay_fraction: 0.1 };
    check(&m, 2, "kinetic, thermal liquid, viscosity, Cass");
}

#[test]
fn jacobian_matches_finite_differences_other_boundaries() {
    let mut m = column(
        uniform_mesh(3.0, 7),
        sandy_loam(),
        dry_surface(291.15, 0.2),
        water_table(298.15),
        291.15,
        298.15,
        YEAR,
    );
    m.surface = Periods::single(SurfaceBc {
        heat: SurfaceHeat::Flux(Schedule::Constant(5.0)),
        water: SurfaceWater::Atmosphere {
            relative_humidity: Schedule::Constant(0.4),
            resistance: Some(Schedule::Constant(100.0)),
        },
    });
    m.bottom = Periods::single(BottomBc {
        heat: BottomHeat::GeothermalFlux(Schedule::Constant(0.065)),
        water: BottomWater::FreeDrainage,
    });
    for avg in [
        deepdry::props::conductivity::FaceAveraging::Geometric,
        deepdry::props::conductivity::FaceAveraging::Harmonic,
    ] {
        m.physics.face_conductivity = avg;
        check(
            &m,
            3,
            &format!("heat flux, resistance, free drainage, {avg:?}"),
        );
    }
    m.surface = Periods::single(SurfaceBc {
        heat: SurfaceHeat::Temperature(Schedule::Constant(285.0)),
        water: SurfaceWater::Head(Schedule::Constant(-2.0)),
    });
    m.bottom = Periods::single(BottomBc {
        heat: BottomHeat::Temperature(Schedule::Constant(290.0)),
        water: BottomWater::NoFlow,
    });
    check(&m, 4, "head, no flow");
}
