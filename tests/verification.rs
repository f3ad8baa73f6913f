//! The fast variant of every verification case (`deepdry::verify`), through the same code
//! as `deepdry verify`. Each case's README (validation/<case>/README.md) states the source
//! and derives the tolerance; the fast tolerances are stated there too.

use deepdry::verify::{find, run_case, Variant};

fn check(name: &str) {
    let case = find(name).unwrap_or_else(|| panic!("no case {name}"));
    let o = run_case(&case, Variant::Fast);
    eprint!(
        "{}",
        deepdry::verify::report::table(std::slice::from_ref(&o), true)
    );
    for n in &o.result.notes {
        eprintln!("  {n}");
    }
    eprintln!("  {:.2} s", o.wall_seconds);
    if let Some(e) = &o.error {
        panic!("{name}: run failed: {e}");
    }
    // A case that compares nothing proves nothing.
    assert!(
        !o.result.checks.is_empty(),
        "{name}: the case made no checks"
    );
    for c in &o.result.checks {
        assert!(
            c.passed(),
            "{name}: {} = {:.3e} above the tolerance {:.3e} ({})",
            c.quantity,
            c.error,
            c.tolerance,
            c.source
        );
    }
}

/// Fourier's law, two layers in series: T within 1e-6 K, heat flux within 1e-6 (exact on any mesh).
#[test]
fn two_layer_geotherm_is_piecewise_linear_with_continuous_flux() {
    check("two-layer-geotherm");
}

/// Carslaw & Jaeger (1959) §2.4: T0 + Gz + ΔT erfc(z/2√(κt)); fast tolerance 1 % of ΔT.
#[test]
fn surface_step_matches_erfc_solution() {
    check("surface-step");
}

/// Carslaw & Jaeger (1959) §2.6: amplitude e^(−z/d), lag z/d; tolerance from the a-priori
/// backward-Euler and spatial error estimates.
#[test]
fn periodic_surface_temperature_decays_as_exp_minus_z_over_d() {
    check("periodic-surface");
}

/// Gardner (1958): steady evaporation rate and head profile; fast tolerance 3e-3.
#[test]
fn gardner_evaporation_matches_rate_and_profile() {
    check("gardner-evaporation");
}

/// Srivastava & Yeh (1991): transient infiltration series solution; fast tolerance 2 %.
#[test]
fn infiltration_matches_srivastava_yeh_series() {
    check("srivastava-yeh-infiltration");
}

/// Fick (1855) with Millington & Quirk (1961): linear vapour density, flux −Dv Δrv/L, 1e-6.
#[test]
fn dry_layer_vapour_flux_obeys_ficks_law() {
    check("fick-vapour-diffusion");
}

/// Pseudo-steady front δ = √(2 Dv Δrv t/(ρw Δθ)); tolerance from the front's error budget.
#[test]
fn drying_front_deepens_as_sqrt_t() {
    check("drying-front");
}

/// Water balance at steady state with closed ends: |ρw ql + jv| ≤ 1e-6 |jv| at every face.
#[test]
fn closed_column_liquid_flux_balances_vapour_flux() {
    check("closed-column-loop");
}

/// Kinetic phase change → equilibrium as O(1/b) over three decades of b.
#[test]
fn kinetic_phase_change_converges_to_equilibrium() {
    check("kinetic-to-equilibrium");
}

/// IAPWS releases, Perry's Handbook and steam tables; Kelvin relation (bounds per table).
#[test]
fn water_properties_match_published_tables() {
    check("water-properties");
}

/// Mesh refinement on Gardner's smooth profile: observed order 2 ± 0.2.
#[test]
fn mesh_refinement_shows_second_order() {
    check("mesh-order");
}

/// Fixed-step refinement: backward Euler order 1 ± 0.1, BDF2 order 2 ± 0.2.
#[test]
fn time_refinement_shows_first_and_second_order() {
    check("time-order");
}

/// Climate-shift run of 100 kyr: cumulative water and energy balance errors below 1e-8.
#[test]
fn climate_shift_balances_close_to_1e_minus_8() {
    check("balance-closure");
}

/// Steady chloride under steady recharge: c = Fd/q in every cell (reached, and from
/// initial_steady) and the recharge estimate Fd/c = q, within 1e-12 (Allison & Hughes 1978;
/// Eriksson & Khunakasem 1969).
#[test]
fn steady_chloride_is_deposition_over_recharge() {
    check("steady-chloride");
}

/// Flux-inlet advection–dispersion (van Genuchten & Alves 1982): error within 1.1× the
/// upwind modified-equation estimate, observed order 1 ± 0.1 in Δz.
#[test]
fn advection_dispersion_matches_flux_inlet_solution_at_first_order() {
    check("solute-advection-dispersion");
}

/// Diffusion from a fixed bottom concentration (Crank 1975, erfc with images): error within
/// 2.5× the truncation estimate, observed order 2 ± 0.2 in Δz.
#[test]
fn solute_diffusion_matches_erfc_at_second_order() {
    check("solute-diffusion-step");
}

/// A closed column drying into dry air keeps its solute to 1e-12 while the water leaves.
#[test]
fn closed_column_keeps_its_solute_while_drying() {
    check("solute-closed-drying");
}

/// Stepped deposition, salty groundwater and a solubility limit: the solute balance from
/// the cumulative series closes to 1e-12.
#[test]
fn solute_balance_closes_to_1e_minus_12() {
    check("solute-balance-closure");
}

/// Root water uptake: steady flux = infiltration minus the uptake above (mass
/// conservation), unstressed uptake = potential, the Feddes et al. (1978) shape, balance.
#[test]
fn root_uptake_matches_its_integral_and_the_potential() {
    check("root-uptake");
}

/// A water table falling and rising through 0.5 m cells with cell-averaged retention:
/// the bottom flux within ±10 % of its mean, balance ≤ 1e-8.
#[test]
fn moving_water_table_gives_a_smooth_flux() {
    check("moving-water-table");
}

/// Ponding surface store through two floods: balance ≤ 1e-10 with pond and runoff, the
/// applied water exact, the pond within the runoff law's bound.
#[test]
fn ponding_cycle_closes_its_balance() {
    check("ponding-cycle");
}

/// Bad input to the runner: an unknown case name is refused in one line.
#[test]
fn unknown_case_name_is_refused() {
    let e = deepdry::verify::command(Some("no-such-case".into()), None).unwrap_err();
    let msg = e.to_string();
    assert_eq!(e.exit_code(), deepdry::error::exit::INPUT);
    assert!(!msg.contains('\n') && msg.contains("no-such-case"), "{msg}");
}

/// Bad input to the runner: a report folder that cannot be made is refused in one line,
/// before any case runs.
#[test]
fn unusable_report_folder_is_refused() {
    let file = std::env::temp_dir().join(format!("deepdry-verify-file-{}", std::process::id()));
    std::fs::write(&file, b"x").unwrap();
    for dir in [file.clone(), file.join("report")] {
        let e = deepdry::verify::command(Some("water-properties".into()), Some(dir)).unwrap_err();
        let msg = e.to_string();
        assert_eq!(e.exit_code(), deepdry::error::exit::IO, "{msg}");
        assert!(
            !msg.contains('\n') && msg.contains("report folder"),
            "{msg}"
        );
    }
    let _ = std::fs::remove_file(&file);
}

/// Linearised infiltration (exponential soil, surface at K = Ks): θ profiles and cumulative
/// infiltration against the advection–diffusion solution in K (derived; Philip 1969,
/// Warrick 1975 from memory); geometric face averaging at observed order 2 ± 0.2.
#[test]
fn linearised_infiltration_matches_advection_diffusion_in_k() {
    check("linearised-infiltration");
}

/// Darcy through a column filled by ponding: steady flux Ks (Δh/L + 1), linear head and
/// saturated storage within 1e-9 (exact on any mesh); filling-run water balance ≤ 1e-8.
#[test]
fn ponded_column_fills_to_the_darcy_steady_state() {
    check("ponded-darcy-column");
}

/// Green & Ampt (1911), derived, with Neuman's (1976) front suction: cumulative ponded
/// infiltration within 3 % at late time, the difference shrinking with time.
#[test]
fn ponded_infiltration_approaches_green_ampt() {
    check("green-ampt");
}

/// Cycle skipping on linear conduction: a 2 K excess decaying under a yearly surface wave
/// (Carslaw & Jaeger 1959 §2.6 for the periodic part; the slab's Fourier series, derived,
/// for the excess), within the derived sum of the jumps' errors plus the periodic part's
/// a-priori discretisation error (validation/cycle-skipping/README.md); at most half of
/// the years integrated.
#[test]
fn cycle_skipping_follows_a_decaying_excess_under_a_yearly_wave() {
    check("cycle-skipping");
}

/// Carslaw & Jaeger (1959) §2.6: the periodic steady state found before the run
/// (`[initial] state = "periodic"`) is the steady-periodic solution at the start; the
/// tolerance is the a-priori budget of periodic-surface plus the spin-up's convergence
/// allowance (validation/periodic-state/README.md).
#[test]
fn periodic_state_is_the_steady_periodic_solution() {
    check("periodic-state");
}
