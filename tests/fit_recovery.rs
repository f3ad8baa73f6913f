//! `deepdry fit` recovers known soil parameters from synthetic noisy observations of a
//! deepdry run, within the standard errors it reports (the estimate of a correctly
//! specified least-squares problem is unbiased to first order with the covariance
//! (JᵀWJ)⁻¹; common practice), and refuses malformed fit files in one line.

mod support;

use deepdry::case::Override;
use deepdry::fit::compare::interpolate;
use deepdry::fit::fitting::{compare_at_optimum, fit, read_fit_file, results_of, write_outputs};
use deepdry::solve::linear::SolverKind;
use std::path::Path;
use support::{arg, assert_one_line_error, deepdry, Scratch};

/// Standard normal deviates from xorshift64* and Box–Muller (repeatable).
struct Normal(u64);
impl Normal {
    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        ((v >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn next(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

fn quickstart() -> String {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    std::fs::read_to_string(p)
        .unwrap()
        .replace("end_year = 1000.0", "end_year = 100.0")
}

#[test]
fn fit_recovers_van_genuchten_parameters_within_their_standard_errors() {
    let dir = Scratch::new("fit-recovery");
    let case_text = quickstart();
    let case = dir.write("case.toml", &case_text);
    // The truth: the case as it is (α = 7.5 1/m, n = 1.89), profiles at 100 yr, at the
    // fit's default tolerance.
    let model = deepdry::case::parse_with_overrides(
        &case_text,
        "case.toml",
        &dir.path,
        &[
            Override::set("output.times_year", "[100.0]").unwrap(),
            Override::set("time.rtol", "1e-6").unwrap(),
        ],
    )
    .unwrap();
    let (rec, _) = deepdry::sim::run_in_memory(&model, SolverKind::BlockThomas).unwrap();
    let res = results_of(&model, &rec);
    let k = deepdry::fit::compare::profile_at(&res.profiles.time, 100.0).unwrap();
    let suction: Vec<f64> = res.profiles.head[k]
        .iter()
        .map(|h| (-h).max(1e-3).log10())
        .collect();
    let mut noise = Normal(2024);
    let (s_sig, t_sig) = (0.02, 0.005);
    let mut obs = String::from("time_year,depth_m,quantity,value,sigma\n");
    for i in 0..20 {
        let z = 0.5 + i as f64;
        let s = interpolate(&res.depth, &suction, z) + s_sig * noise.next();
        let t = interpolate(&res.depth, &res.profiles.liquid_content[k], z) + t_sig * noise.next();
        obs.push_str(&format!(
            "100,{z},log10_suction_m,{s},{s_sig}\n100,{z},liquid_content,{t},{t_sig}\n"
        ));
    }
    dir.write("obs.csv", &obs);
    let fit_path = dir.write(
        "fit.toml",
        r#"case = "case.toml"
observations = "obs.csv"
[[parameters]]
key = "soils.sandy_loam.van_genuchten.alpha_per_m"
initial = 3.0
min = 0.5
max = 50.0
log = true
[[parameters]]
key = "soils.sandy_loam.van_genuchten.n"
initial = 1.5
min = 1.1
max = 4.0
"#,
    );
    let file = read_fit_file(&fit_path).unwrap();
    assert_eq!(file.case, case);
    let r = fit(&file, 2).unwrap();
    let truth = [7.5, 1.89];
    for (j, t) in truth.iter().enumerate() {
        let (e, se) = (r.result.estimate[j], r.result.standard_error[j]);
        assert!(se.is_finite() && se > 0.0 && se < 0.2 * t, "{j}: se {se}");
        assert!(
            (e - t).abs() <= 3.0 * se,
            "{}: estimate {e} ± {se}, truth {t}",
            file.parameters[j].key
        );
    }
    // Noise of the size of σ: reduced χ² near 1 (40 observations, 2 parameters).
    assert!(
        (0.4..2.0).contains(&r.result.reduced_chi_square),
        "reduced chi-square {}",
        r.result.reduced_chi_square
    );
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    // The outputs: summary, fitted case (it reads as a case with the estimates), and the
    // comparison at the optimum.
    let out = dir.join("out");
    write_outputs(&r, &out).unwrap();
    let summary = std::fs::read_to_string(out.join("fit-summary.json")).unwrap();
    for w in [
        "\"parameters\"",
        "\"standard_error\"",
        "\"reduced_chi_square\"",
        "\"correlation\"",
        "\"runs\"",
    ] {
        assert!(summary.contains(w), "{w} missing");
    }
    let best = deepdry::case::load(&out.join("best.toml")).unwrap();
    let vg = format!("{:?}", best.soils[0].retention.law);
    assert!(vg.contains(&format!("{:?}", r.result.estimate[1])), "{vg}");
    let cmp = compare_at_optimum(&r, &out).unwrap();
    for s in &cmp.stats {
        assert!(s.weighted_rmse < 1.5, "{s:?}");
    }
}

#[test]
fn malformed_fit_files_are_refused_in_one_line() {
    let dir = Scratch::new("fit-bad");
    dir.write("case.toml", &quickstart());
    dir.write(
        "obs.csv",
        "time_year,depth_m,quantity,value,sigma\n100,1,temperature_C,20,0.1\n",
    );
    let p = "[[parameters]]\n";
    for (text, words) in [
        ("observations = \"obs.csv\"\n[[parameters]]\nkey = \"time.end_year\"\ninitial = 1.0\nmin = 0.0\nmax = 2.0\n", vec!["case", "missing key"]),
        (&format!("case = \"case.toml\"\nobservations = \"obs.csv\"\n{p}key = \"soils.sandy_loam.van_genuchten.n\"\ninitial = 5.0\nmin = 1.1\nmax = 4.0\n") as &str, vec!["min ≤ initial ≤ max"]),
        (&format!("case = \"case.toml\"\nobservations = \"obs.csv\"\n{p}key = \"soils.sandy_loam.van_genuchten.n\"\ninitial = 1.5\nmin = 0.0\nmax = 4.0\nlog = true\n"), vec!["log = true needs min > 0"]),
        (&format!("case = \"case.toml\"\nobservations = \"obs.csv\"\n{p}key = \"soils.sandy_loam.van_genuchten.n\"\ninitial = 1.5\nmin = 1.1\nmax = 4.0\nstep = 0.1\n"), vec!["step"]),
        ("case = \"case.toml\"\nobservations = \"obs.csv\"\nparameters = []\n", vec!["at least one [[parameters]]"]),
        (&format!("case = \"case.toml\"\nobservations = \"obs.csv\"\nrtol = 2.0\n{p}key = \"soils.sandy_loam.van_genuchten.n\"\ninitial = 1.5\nmin = 1.1\nmax = 4.0\n"), vec!["rtol", "(0, 1)"]),
    ] {
        let f = dir.write("fit.toml", text);
        let o = deepdry(&["fit", arg(&f), "--out", arg(&dir.join("out"))]);
        assert_one_line_error(&o, 2, &words);
    }
    // A key the case reader does not know: the override's own message.
    let f = dir.write(
        "fit.toml",
        &format!("case = \"case.toml\"\nobservations = \"obs.csv\"\n{p}key = \"soils.sandy_loam.van_genuchten.nn\"\ninitial = 1.5\nmin = 1.1\nmax = 4.0\n"),
    );
    let o = deepdry(&["fit", arg(&f), "--out", arg(&dir.join("out"))]);
    assert_one_line_error(&o, 2, &["nn", "did you mean"]);
}

/// The surface and bottom temperatures seen through one temperature observation in the
/// middle of the column: the (nearly linear) profile there depends on their mean only,
/// so the two trade off; the fit must say so instead of giving a confident answer.
#[test]
fn parameters_that_trade_off_are_reported_as_not_identifiable() {
    let dir = Scratch::new("fit-tradeoff");
    dir.write("case.toml", &quickstart());
    dir.write(
        "obs.csv",
        "time_year,depth_m,quantity,value,sigma\n100,10,temperature_C,22.6,0.05\n",
    );
    let f = dir.write(
        "fit.toml",
        "case = \"case.toml\"\nobservations = \"obs.csv\"\nmax_iterations = 10\n[[parameters]]\nkey = \"surface.temperature_C\"\ninitial = 20.0\nmin = 10.0\nmax = 30.0\n[[parameters]]\nkey = \"bottom.temperature_C\"\ninitial = 20.0\nmin = 10.0\nmax = 30.0\n",
    );
    let file = read_fit_file(&f).unwrap();
    let r = fit(&file, 2).unwrap();
    assert!(
        r.result.near_singular || r.result.unidentifiable.contains(&(0, 1)),
        "{:?}",
        r.result
    );
    assert!(
        r.warnings.iter().any(|w| w.contains("not identifiable")),
        "{:?}",
        r.warnings
    );
}
