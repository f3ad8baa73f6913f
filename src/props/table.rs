//! Property tables for users (`deepdry table`). STUB: to be written.

use crate::error::Result;
use crate::model::Model;

/// CSV `temperature_C,saturation_pressure_Pa,saturated_vapor_density_kg_m3,latent_heat_J_kg,liquid_density_kg_m3,viscosity_Pa_s,surface_tension_N_m,vapor_diffusivity_m2_s`.
pub fn water_csv(from_c: f64, to_c: f64, step_c: f64) -> Result<String> {
    let _ = (from_c, to_c, step_c);
    todo!()
}

/// CSV `head_m,liquid_content,relative_conductivity,conductivity_m_s,relative_humidity_20C,thermal_conductivity_W_m_K`
/// for the layer named `layer`.
pub fn soil_csv(model: &Model, layer: &str) -> Result<String> {
    let _ = (model, layer);
    todo!()
}
