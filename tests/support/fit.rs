//! A small chloride-dating problem for the fit tests: a case whose deposition rate and
//! climate-shift time are to be found, synthetic noisy observations of its truth, and a
//! reader of the fit summary's parameter lines.

use deepdry::case::Override;
use deepdry::fit::compare::{interpolate, profile_at};
use deepdry::fit::fitting::results_of;
use deepdry::solve::linear::SolverKind;
use proptest::prelude::RngExt;
use proptest::test_runner::{RngAlgorithm, TestRng};
use std::path::Path;

/// 10 m of sandy loam over a water table, spun up under 15 mm/yr of recharge with
/// chloride deposited at `FD` g m⁻² yr⁻¹, then open to dry air from `SHIFT` (years);
/// 24 graded cells, 500 years (about 0.2 s a run at rtol 1e-6).
pub const CASE: &str = r#"title = "chloride dating test column"
[column]
depth_m = 10.0
[mesh]
cells = 24
growth = 1.2
surface_cell_m = 0.05
[soils.sandy_loam]
van_genuchten = { theta_r = 0.065, theta_s = 0.41, alpha_per_m = 7.5, n = 1.89 }
dry_end = "fayer-simmons"
saturated_conductivity_m_per_s = 1.23e-5
campbell = { a = 1.460, b = 1.652, c = 9.222, d = 0.274 }
solid_heat_capacity_J_per_m3_K = 1.18e6
enhancement = "none"
[[layers]]
name = "alluvium"
soil = "sandy_loam"
top_m = 0.0
bottom_m = 10.0
[physics]
vapor = "equilibrium"
[[surface]]
temperature_C = 12.0
flux_mm_per_year = 15.0
[[surface]]
from_year = SHIFT
temperature_C = 15.0
relative_humidity = 0.25
[bottom]
head_m = 0.0
geothermal_flux_W_per_m2 = 0.065
[initial]
state = "steady"
gradient_K_per_m = 0.03
[time]
start_year = -500.0
end_year = 0.0
max_step_year = 50.0
[output]
times_year = [0.0]
[[solutes]]
name = "chloride"
free_diffusivity_m2_per_s = 2.03e-9
dispersivity_m = 0.05
deposition_g_per_m2_per_year = FD
initial_steady = true
"#;

pub fn case(fd: f64, shift: f64) -> String {
    CASE.replace("FD", &format!("{fd:?}"))
        .replace("SHIFT", &format!("{shift:?}"))
}

/// Standard normal deviates: proptest's ChaCha generator (ChaCha20, documented to give the
/// same sequence for a seed on every system and proptest version) through the Box–Muller
/// transform (Box & Muller 1958).
pub struct Normal(TestRng);
impl Normal {
    pub fn new(seed: u8) -> Normal {
        Normal(TestRng::from_seed(RngAlgorithm::ChaCha, &[seed; 32]))
    }
    pub fn next(&mut self) -> f64 {
        let u1: f64 = 1.0 - self.0.random::<f64>(); // (0, 1]
        let u2: f64 = self.0.random::<f64>();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// The value of `"field": <number>` on the summary line of parameter `key`.
pub fn summary_field(summary: &str, key: &str, field: &str) -> f64 {
    let line = summary
        .lines()
        .find(|l| l.contains(&format!("\"key\": \"{key}\"")))
        .unwrap_or_else(|| panic!("{key} not in the summary:\n{summary}"));
    let tail = &line[line.find(&format!("\"{field}\": ")).unwrap() + field.len() + 4..];
    let end = tail.find([',', '}']).unwrap();
    tail[..end].trim().parse().unwrap()
}

/// The truth: deposition 0.1 g m⁻² yr⁻¹, shift at year −300.
pub const TRUTH: (f64, f64) = (0.1, -300.0);

/// Writes into `dir` the observation file `obs.csv` (25 chloride concentrations at year 0,
/// every 0.4 m from 0.1 to 9.7 m, from the truth run at the fit's default tolerance with
/// 5 % normal noise of seed `seed`), the first-guess case `case.toml` (a third of the
/// deposition, the shift 200 years too late) and `fit.toml` (both parameters, `extra`
/// lines at its top); returns the fit file.
pub fn write_problem(dir: &Path, seed: u8, extra: &str) -> std::path::PathBuf {
    let model = deepdry::case::parse_with_overrides(
        &case(TRUTH.0, TRUTH.1),
        "truth.toml",
        dir,
        &[Override::set("time.rtol", "1e-6").unwrap()],
    )
    .unwrap();
    let (rec, _) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
    let res = results_of(&model, &rec);
    let k = profile_at(&res.profiles.time, 0.0).unwrap();
    let c = &res.solutes[0].concentration[k];
    let mut noise = Normal::new(seed);
    let mut obs = String::from("time_year,depth_m,quantity,value,sigma\n");
    for i in 0..25 {
        let z = 0.1 + 0.4 * i as f64;
        let v = interpolate(&res.depth, c, z);
        let sigma = 0.05 * v;
        obs.push_str(&format!(
            "0,{z},concentration_chloride,{},{sigma}\n",
            v + sigma * noise.next()
        ));
    }
    std::fs::write(dir.join("obs.csv"), obs).unwrap();
    std::fs::write(dir.join("case.toml"), case(0.03, -100.0)).unwrap();
    let f = dir.join("fit.toml");
    std::fs::write(&f, format!("{extra}{FIT}")).unwrap();
    f
}

/// The fit file's body.
pub const FIT: &str = r#"case = "case.toml"
observations = "obs.csv"
[[parameters]]
key = "solutes[1].deposition_g_per_m2_per_year"
initial = 0.03
min = 0.001
max = 10.0
log = true
[[parameters]]
key = "surface[2].from_year"
initial = -100.0
min = -490.0
max = -10.0
"#;
