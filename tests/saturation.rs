//! Storage through saturation: a submerged column whose water table rises by ΔH stores
//! ρw Ss L ΔH more water (specific storage; exact once the column is hydrostatic again),
//! all of it entering through the bottom; with Ss = 0 (incompressible) it stores none.

mod support;

use deepdry::solve::linear::SolverKind;

fn case(ss: &str) -> String {
    format!(
        r#"
[column]
depth_m = 5.0
[mesh]
cells = 25
[soils.sl]
van_genuchten = {{ theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89 }}
saturated_conductivity_m_per_s = 1.23e-5
thermal_conductivity_W_per_m_K = 1.5
solid_heat_capacity_J_per_m3_K = 1.18e6
{ss}
[[layers]]
soil = "sl"
top_m = 0.0
bottom_m = 5.0
[physics]
viscosity_correction = false
[surface]
temperature_C = 20.0
no_flow = true
[bottom]
head_m = {{ from_year = 0.0, to_year = 1.0, start = 6.0, end = 7.0 }}
temperature_C = 20.0
[initial]
state = "steady"
[time]
end_year = 3.0
"#
    )
}

#[test]
fn a_rising_table_in_a_submerged_column_fills_its_specific_storage() {
    for (ss, expected) in [(1.0e-4, 1000.0 * 1.0e-4 * 5.0 * 1.0), (0.0, 0.0)] {
        let text = case(&if ss > 0.0 {
            format!("specific_storage_per_m = {ss}")
        } else {
            String::new()
        });
        let model =
            deepdry::case::parse_with_overrides(&text, "case.toml", std::path::Path::new("."), &[])
                .unwrap();
        let (rec, finish) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
        let (a, b) = (&rec.series[0], rec.series.last().unwrap());
        let stored = b.water_storage - a.water_storage;
        assert!(
            (stored - expected).abs() <= 1e-6 * expected.max(1e-3),
            "Ss {ss}: stored {stored} kg/m2, expected {expected}"
        );
        // All of it came through the bottom (inflow: negative bottom outflow), to the
        // balance error (Newton tolerance of the steps; measured 1.2e-8 and 1.9e-7 kg/m2,
        // against 2000 kg/m2 stored).
        assert!(
            (b.bottom_water_cumulative + stored).abs() <= 1e-6,
            "Ss {ss}: bottom {} kg/m2",
            b.bottom_water_cumulative
        );
        assert!(
            finish.balance_abs[1].abs() <= 1e-6,
            "{:e}",
            finish.balance_abs[1]
        );
    }
}
