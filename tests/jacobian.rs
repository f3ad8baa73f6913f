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
    let mut counted = 0usize;
    let mut tight = 0usize;
    for trial in 0..8 {
        // Even trials, rough states: T 5–45 °C, h from −1e-2 to −1e5 m log-uniform per cell
        // (some cells wet). Odd trials, smooth states: one head level from −1e-2 to −1e5 m
        // with ±10 % per cell and T within ±1 K of a linear profile. rv within ±20 % of
        // equilibrium in both.
        let mut u = vec![0.0; 3 * n];
        let level = -(10f64.powf(-2.0 + 7.0 * rng.next()));
        for i in 0..n {
            if trial % 2 == 0 {
                u[3 * i] = 278.15 + 40.0 * rng.next();
                u[3 * i + 1] = if rng.next() < 0.15 {
                    -1e-3 * rng.next()
                } else {
                    -(10f64.powf(-2.0 + 7.0 * rng.next()))
                };
            } else {
                u[3 * i] = 288.15 + i as f64 + 2.0 * (rng.next() - 0.5);
                u[3 * i + 1] = level * (0.9 + 0.2 * rng.next());
            }
        }
        deepdry::run::equilibrate_vapor(&mut u);
        for i in 0..n {
            u[3 * i + 2] *= 0.8 + 0.4 * rng.next();
        }
        let c = 1.0 / (1e3 + 1e7 * rng.next());
        // The history only shifts the residual; derivatives do not see it.
        let hist = vec![0.0; 3 * n];
        let t = 0.0;
        let mut res = vec![0.0; 3 * n];
        let mut jac = BlockTri::new(n);
        sys.assemble(t, &u, c, &hist, &mut res, Some(&mut jac))
            .unwrap();
        // The residual-only path (values without derivatives, used by the modified Newton
        // iterations) runs the same code on `Dual<0>`: its residual must equal the one
        // computed with derivatives bitwise.
        let mut storage = vec![[[0.0; 3]; 3]; n];
        sys.storage_jacobian_into(&mut storage);
        let mut res_values = vec![0.0; 3 * n];
        sys.assemble(t, &u, c, &hist, &mut res_values, None)
            .unwrap();
        assert_eq!(res, res_values, "{label}: residual-only path differs");
        // `memory = "lean"` keeps no evaluation with derivatives and evaluates the
        // Jacobian cell by cell as it goes: the same residual, Jacobian and storage
        // blocks, bitwise, as a system that evaluates everything afresh.
        {
            let mut direct = System::new(model);
            let mut lean = System::new(model);
            lean.lean = true;
            let (mut r1, mut r2) = (vec![0.0; 3 * n], vec![0.0; 3 * n]);
            let (mut j1, mut j2) = (BlockTri::new(n), BlockTri::new(n));
            direct
                .assemble(t, &u, c, &hist, &mut r1, Some(&mut j1))
                .unwrap();
            lean.assemble(t, &u, c, &hist, &mut r2, Some(&mut j2))
                .unwrap();
            assert_eq!(r1, res, "{label}: direct residual");
            assert_eq!(r2, res, "{label}: lean residual");
            assert_eq!(j2.diag, j1.diag, "{label}: lean Jacobian, diagonal");
            assert_eq!(j2.lower, j1.lower, "{label}: lean Jacobian, lower");
            assert_eq!(j2.upper, j1.upper, "{label}: lean Jacobian, upper");
            let (mut s1, mut s2) = (vec![[[0.0; 3]; 3]; n], vec![[[0.0; 3]; 3]; n]);
            direct.storage_jacobian_into(&mut s1);
            lean.storage_jacobian_into(&mut s2);
            assert_eq!(s2, s1, "{label}: lean storage blocks");
            // Newton's call takes the storage blocks from the Jacobian's pass: the same.
            for sys2 in [&mut direct, &mut lean] {
                let (mut j3, mut s3) = (BlockTri::new(n), vec![[[0.0; 3]; 3]; n]);
                sys2.assemble_full(t, &u, c, &hist, &mut r2, Some((&mut j3, Some(&mut s3))))
                    .unwrap();
                assert_eq!(s3, s1, "{label}: storage blocks from the Jacobian's pass");
                assert_eq!(
                    j3.diag, j1.diag,
                    "{label}: Jacobian with the storage blocks"
                );
            }
            lean.assemble(t, &u, c, &hist, &mut r2, None).unwrap();
            assert_eq!(r2, res, "{label}: lean residual-only path");
        }
        // The Jacobian is linear in the integrator coefficient: J(c2) = J(c) + (c2 − c) S,
        // with S the storage blocks (what lets Newton change Δt without re-evaluating).
        let c2 = 2.7 * c;
        let mut jac2 = BlockTri::new(n);
        sys.assemble(t, &u, c2, &hist, &mut res_values, Some(&mut jac2))
            .unwrap();
        for (i, blk) in storage.iter().enumerate() {
            for (k, sv) in blk.as_flattened().iter().enumerate() {
                let (j1, j2) = (jac.diag[i].as_flattened(), jac2.diag[i].as_flattened());
                let expect = j1[k] + (c2 - c) * sv;
                let got = j2[k];
                let size = got.abs().max(j1[k].abs());
                assert!(
                    (got - expect).abs() <= 1e-12 * size.max(1e-300),
                    "{label}: storage split, cell {i} entry {k}: {got:e} vs {expect:e}"
                );
            }
            assert_eq!(
                jac.lower[i], jac2.lower[i],
                "{label}: off-diagonal depends on c"
            );
            assert_eq!(
                jac.upper[i], jac2.upper[i],
                "{label}: off-diagonal depends on c"
            );
        }
        // Magnitude of the terms in each row: round-off in R is ~1e-16 of it.
        let mut rscale = vec![0.0; 3 * n];
        sys.residual_scale_into(c, &hist, &mut rscale);
        // Linearised evaluation (`System::evaluate` after an evaluation with derivatives,
        // for unknowns within 1e-7 relative of it): the same residual as a direct
        // evaluation to 1e-11 of the row's terms (its error is of second order: with
        // d ln psat/d ln T ≈ 18, (18 · 1e-7)²/2 ≈ 2e-12).
        let mut near = u.clone();
        for (k, x) in near.iter_mut().enumerate() {
            let size = if k % 3 == 1 {
                x.abs().max(1e-2)
            } else {
                x.abs()
            };
            *x += 9e-8 * size * (2.0 * rng.next() - 1.0);
        }
        let mut res_lin = vec![0.0; 3 * n];
        sys.assemble(t, &u, c, &hist, &mut res_lin, Some(&mut jac2))
            .unwrap();
        sys.assemble(t, &near, c, &hist, &mut res_lin, None)
            .unwrap();
        let mut direct = System::new(model);
        let mut res_direct = vec![0.0; 3 * n];
        direct
            .assemble(t, &near, c, &hist, &mut res_direct, None)
            .unwrap();
        assert_ne!(
            res_lin, res_values,
            "{label}: the perturbation changed nothing"
        );
        // The residual-only evaluation leaves out the flux parts of linearised faces;
        // completed, they are those of a full value evaluation at the same state, bitwise.
        sys.complete_face_parts(&near);
        let parts = |s: &System| -> Vec<[f64; 5]> {
            s.faces
                .iter()
                .map(|f| {
                    [
                        f.liquid_iso.v,
                        f.liquid_th.v,
                        f.vapor_iso.v,
                        f.vapor_th.v,
                        f.conduction.v,
                    ]
                })
                .collect()
        };
        let completed = parts(&sys);
        sys.evaluate(t, &near);
        assert_eq!(
            completed,
            parts(&sys),
            "{label}: completed flux parts differ"
        );
        for k in 0..3 * n {
            assert!(
                (res_lin[k] - res_direct[k]).abs() <= 1e-11 * rscale[k],
                "{label} trial {trial}: linearised residual {k}: {:e} vs {:e} (scale {:e})",
                res_lin[k],
                res_direct[k],
                rscale[k]
            );
        }
        // An evaluation with derivatives where the first half of the cells moved beyond
        // 1e-7 (evaluated afresh) and the rest within it (kept, linearised): the residual
        // as a direct evaluation's to 1e-11 of the terms, the Jacobian as a fresh one's to
        // 1e-5 of each row's largest entry (first order in the 1e-7 change, times the
        // laws' slopes); a system restored from the kept states then continues bitwise.
        let mut moved = near.clone();
        for (k, x) in moved.iter_mut().enumerate().take(3 * (n / 2)) {
            let size = if k % 3 == 1 {
                x.abs().max(1e-2)
            } else {
                x.abs()
            };
            *x += 1e-6 * size;
        }
        let mut jac_kept = BlockTri::new(n);
        sys.assemble(t, &moved, c, &hist, &mut res_lin, Some(&mut jac_kept))
            .unwrap();
        let mut jac_fresh = BlockTri::new(n);
        let mut fresh = System::new(model);
        fresh
            .assemble(t, &moved, c, &hist, &mut res_direct, Some(&mut jac_fresh))
            .unwrap();
        for k in 0..3 * n {
            assert!(
                (res_lin[k] - res_direct[k]).abs() <= 1e-11 * rscale[k],
                "{label} trial {trial}: kept evaluation, residual {k}: {:e} vs {:e}",
                res_lin[k],
                res_direct[k]
            );
        }
        for i in 0..n {
            for (a, b) in [
                (&jac_kept.lower[i], &jac_fresh.lower[i]),
                (&jac_kept.diag[i], &jac_fresh.diag[i]),
                (&jac_kept.upper[i], &jac_fresh.upper[i]),
            ] {
                let (a, b) = (a.as_flattened(), b.as_flattened());
                for k in 0..9 {
                    assert!(
                        (a[k] - b[k]).abs() <= 1e-5 * row_scale(&jac_fresh, i, k / 3),
                        "{label} trial {trial}: kept Jacobian, block row {i} entry {k}: {:e} vs {:e}",
                        a[k],
                        b[k]
                    );
                }
            }
        }
        let (cells_at, faces_at) = sys.linearization_states();
        let mut restored = System::new(model);
        restored.restore_linearization(cells_at, faces_at);
        let mut again = near.clone();
        again[0] += 1e-3;
        let mut res_a = vec![0.0; 3 * n];
        let mut res_b = vec![0.0; 3 * n];
        let mut jac_b = BlockTri::new(n);
        sys.assemble(t, &again, c, &hist, &mut res_a, Some(&mut jac_kept))
            .unwrap();
        restored
            .assemble(t, &again, c, &hist, &mut res_b, Some(&mut jac_b))
            .unwrap();
        assert_eq!(res_a, res_b, "{label}: restored system differs");
        assert_eq!(
            jac_kept.diag, jac_b.diag,
            "{label}: restored Jacobian differs"
        );
        assert_eq!(
            jac_kept.lower, jac_b.lower,
            "{label}: restored Jacobian differs"
        );
        // The finite differences of the direct residual: the linearised one (checked
        // against it above, to 1e-11 of the terms) switches a cell between linearised and
        // direct as its neighbour's change crosses 1e-7, a jump of its second-order error.
        sys.forget_linearization();
        let mut rp = vec![0.0; 3 * n];
        let mut rm = vec![0.0; 3 * n];
        let mut rp2 = vec![0.0; 3 * n];
        let mut rm2 = vec![0.0; 3 * n];
        for col in 0..3 * n {
            let x = u[col];
            let step = match col % 3 {
                0 => 1e-5,
                1 => 1e-6 * x.abs().max(1e-2),
                _ => 1e-6 * x.abs().max(1e-9),
            };
            // Richardson-extrapolated central differences (fourth order).
            let mut up = u.clone();
            up[col] = x + step;
            sys.assemble(t, &up, c, &hist, &mut rp, None).unwrap();
            up[col] = x - step;
            sys.assemble(t, &up, c, &hist, &mut rm, None).unwrap();
            up[col] = x + 0.5 * step;
            sys.assemble(t, &up, c, &hist, &mut rp2, None).unwrap();
            up[col] = x - 0.5 * step;
            sys.assemble(t, &up, c, &hist, &mut rm2, None).unwrap();
            let cb = col / 3;
            for rb in cb.saturating_sub(1)..(cb + 2).min(n) {
                for r in 0..3 {
                    let row = 3 * rb + r;
                    let d1 = (rp[row] - rm[row]) / (2.0 * step);
                    let d2 = (rp2[row] - rm2[row]) / step;
                    let fd = (4.0 * d2 - d1) / 3.0;
                    let an = jac.block_mut(rb, cb)[r][col % 3];
                    // Relative agreement, with a floor for round-off in the differenced
                    // residual (1e-16 of its largest terms, amplified by 1/step) and for
                    // couplings negligible against the row's largest entry.
                    let tol = 1e-5 * (an.abs().max(fd.abs()))
                        + 2e-15 * rscale[row] / step
                        + 1e-9 * row_scale(&jac, rb, r);
                    if trial % 2 == 1 && (an != 0.0 || fd != 0.0) {
                        counted += 1;
                        if 2e-15 * rscale[row] / step + 1e-9 * row_scale(&jac, rb, r)
                            < 1e-5 * an.abs().max(fd.abs())
                        {
                            tight += 1;
                        }
                    }
                    assert!(
                        (an - fd).abs() <= tol,
                        "{label} trial {trial}: d R[{rb},{r}] / d u[{cb},{}]: analytic {an:e}, finite difference {fd:e} ({d1:e}, {d2:e}); state {:?}",
                        col % 3,
                        &u[3 * cb.saturating_sub(1)..(3 * cb + 6).min(3 * n)]
                    );
                }
            }
        }
    }
    // The floors must not swallow the test: on the smooth states most entries are judged
    // by the 1e-5 relative criterion alone (measured: about 60 %; the rest are couplings
    // below 1e-9 of the row's largest entry or differenced against much larger terms).
    eprintln!(
        "{label}: {tight} of {counted} nonzero entries of smooth states judged at 1e-5 relative"
    );
    assert!(
        tight * 2 >= counted,
        "{label}: only {tight} of {counted} entries judged at 1e-5 relative"
    );
}

/// The column of most of these checks: 2 m of sandy loam in 8 cells under air of relative
/// humidity `rh` at 18 °C, a water table at 25 °C at the bottom, one year.
fn small_column(rh: f64) -> Model {
    column(
        uniform_mesh(2.0, 8),
        sandy_loam(),
        dry_surface(291.15, rh),
        water_table(298.15),
        291.15,
        298.15,
        YEAR,
    )
}

fn row_scale(jac: &BlockTri<3>, rb: usize, r: usize) -> f64 {
    let mut m = 0.0f64;
    for b in [&jac.lower[rb], &jac.diag[rb], &jac.upper[rb]] {
        for x in b[r].iter() {
            m = m.max(x.abs());
        }
    }
    m
}

#[test]
fn jacobian_matches_finite_differences_equilibrium() {
    let m = small_column(0.2);
    check(&m, 1, "equilibrium, atmosphere/water table");
}

#[test]
fn jacobian_matches_finite_differences_kinetic_thermal_liquid() {
    let mut m = small_column(0.3);
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
        deepdry::props::conductivity::FaceAveraging::Upstream,
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

/// Root water uptake (Feddes-reduced, a sink in the water and energy rows) in the
/// Jacobian: stress heads chosen so that the random heads fall on both sloped parts of
/// the reduction and on its plateau.
#[test]
fn jacobian_matches_finite_differences_with_root_uptake() {
    let mut m = small_column(0.2);
    let shape = RootShape::Linear { depth: 1.5 };
    let root_fraction = deepdry::case::vegetation::root_fractions(&shape, &m.mesh.faces);
    m.vegetation = Periods::single(Some(Vegetation {
        // 300 mm/yr in m/s.
        transpiration: Schedule::Constant(0.3 / YEAR),
        root_fraction,
        roots: shape,
        stress_heads: [-0.005, -0.05, -1.0, -1.0e4],
    }));
    check(&m, 4, "root water uptake");
}

/// A run with a solute keeps, besides the slim cell records, what the faces read of each
/// cell and the whole cell records of the last residual evaluation, from which the flux
/// parts of linearised faces are completed at every step: the same checks on that path
/// (the linearised residual against a direct evaluation to 1e-11 of the terms, the
/// completed parts bitwise those of a full evaluation at the same state, the kept and
/// restored Jacobians, the finite differences).
#[test]
fn jacobian_matches_finite_differences_with_a_solute() {
    let mut m = small_column(0.2);
    m.solutes.push(Solute {
        name: "chloride".into(),
        // Chloride in free water at 25 °C (from memory).
        free_diffusivity: 2.03e-9,
        dispersivity: 0.05,
        surface: SoluteSurface::Deposition(Schedule::Constant(0.1 / YEAR)),
        bottom: SoluteBottom::ZeroGradient,
        initial: SoluteInitial::Constant(10.0),
        uptake_fraction: 0.0,
        solubility: None,
        recharge_depth: None,
        osmotic: None,
    });
    let sys = System::new(&m);
    assert!(
        sys.parts_each_step,
        "a model with a solute asks for the parts"
    );
    check(&m, 5, "with a solute");
}

/// The ponding surface store in the Jacobian: the pond in the top cell's storage and the
/// runoff above the largest ponding depth, with the pond within its 1 mm turn-on band,
/// within the runoff band and above both (central differences of the residual in the top
/// cell's head and temperature; numerical differentiation, common practice); also with
/// the pond open to the air, whose evaporation turns on over the same band.
#[test]
fn jacobian_matches_finite_differences_with_a_pond_and_runoff() {
    let open = || Some((Schedule::Constant(0.2), Schedule::Constant(100.0)));
    for (pmax, air) in [(0.0, None), (0.1, None), (0.1, open()), (0.0, open())] {
        let mut m = small_column(0.2);
        m.surface = Periods::single(SurfaceBc {
            heat: SurfaceHeat::Temperature(Schedule::Constant(291.15)),
            water: SurfaceWater::Pond {
                inflow: Schedule::Constant(1e-5),
                max_depth: Some(pmax),
                air: air.clone(),
            },
        });
        let mut sys = System::new(&m);
        let n = sys.n;
        let d0 = sys.d_above(0);
        // Surface heads: inside the pond's band, inside the runoff band, well above.
        for x in [4e-4, pmax + 1.5e-3 + 3e-4, pmax + 0.05] {
            let mut u = vec![0.0; 3 * n];
            for i in 0..n {
                u[3 * i] = 291.15 + 0.5 * i as f64;
                u[3 * i + 1] = d0 + x + sys.centers[i] - sys.centers[0];
            }
            deepdry::run::equilibrate_vapor(&mut u);
            let c = 1e-4;
            let hist = vec![0.0; 3 * n];
            let t = 1.0;
            let mut res = vec![0.0; 3 * n];
            let mut jac = BlockTri::new(n);
            sys.assemble(t, &u, c, &hist, &mut res, Some(&mut jac))
                .unwrap();
            for (var, e) in [(1usize, 1e-7), (0usize, 1e-4)] {
                let mut plus = u.clone();
                let mut minus = u.clone();
                plus[var] += e;
                minus[var] -= e;
                let (mut rp, mut rm) = (vec![0.0; 3 * n], vec![0.0; 3 * n]);
                sys.assemble(t, &plus, c, &hist, &mut rp, None).unwrap();
                sys.assemble(t, &minus, c, &hist, &mut rm, None).unwrap();
                for row in [0usize, 1] {
                    let fd = (rp[row] - rm[row]) / (2.0 * e);
                    let exact = jac.diag[0][row][var];
                    assert!(
                        (fd - exact).abs() <= 1e-5 * exact.abs().max(fd.abs()) + 1e-12,
                        "Pmax {pmax}, open {}, surface head {x}: d R[{row}]/d u[{var}] = {exact} vs {fd}",
                        air.is_some()
                    );
                }
            }
        }
    }
}
