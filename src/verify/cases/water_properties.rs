//! Water properties against IAPWS releases and steam tables; Kelvin relation (no case
//! file).

use super::*;

pub(super) fn water_properties(_: Variant) -> Result<CaseResult> {
    let mut fig = Figure::new(
        "Saturation pressure: IF97 Eq. 30 against tables",
        "temperature [K]",
        "psat [Pa]",
    );
    fig.log_y = true;
    fig.series.push(Series::line(
        "deepdry (IF97 Eq. 30)",
        (0..=100)
            .map(|k| {
                let t = 273.16 + 3.3 * k as f64;
                (t, crate::props::water::saturation_pressure(t).0)
            })
            .collect(),
    ));
    fig.series.push(Series::points(
        "IF97 Table 35; steam tables",
        crate::verify::water_tables::IF97_TABLE_35
            .iter()
            .chain(crate::verify::water_tables::STEAM_TABLE_PSAT.iter())
            .filter(|p| p.0 <= 600.0)
            .map(|&(t, p)| (t, p * 1e6))
            .collect(),
    ));
    Ok(CaseResult {
        checks: crate::verify::water_tables::all(),
        figures: vec![fig],
        notes: vec![],
    })
}
