//! `deepdry fit` dates a chloride profile: from synthetic noisy chloride concentrations
//! of a small column, it recovers the deposition rate and the time of the climate shift
//! that made them, within the standard errors it reports (the estimate of a correctly
//! specified least-squares problem is unbiased to first order with the covariance
//! (JᵀWJ)⁻¹; common practice), through the command line end to end
//! (`concentration_<solute>` observations, summary, fitted case, compare outputs).

mod support;

use support::fit::{summary_field, write_problem, TRUTH};
use support::{arg, deepdry, stdout, Scratch};

#[test]
fn fit_recovers_chloride_deposition_and_shift_time_within_their_standard_errors() {
    let dir = Scratch::new("fit-chloride");
    let f = write_problem(&dir.path, 22, "");
    let out = dir.join("out");
    let t0 = std::time::Instant::now();
    let o = deepdry(&["fit", arg(&f), "--out", arg(&out), "--jobs", "2"]);
    let text = stdout(&o);
    assert!(o.status.success(), "{text}\n{}", support::stderr(&o));
    eprintln!("{text}\nwall {:.2} s", t0.elapsed().as_secs_f64());
    let summary = std::fs::read_to_string(out.join("fit-summary.json")).unwrap();
    assert!(
        summary.contains("\"stop\": \"objective converged\"")
            || summary.contains("\"stop\": \"step converged\""),
        "{summary}"
    );
    for (key, t) in [
        ("solutes[1].deposition_g_per_m2_per_year", TRUTH.0),
        ("surface[2].from_year", TRUTH.1),
    ] {
        let e = summary_field(&summary, key, "estimate");
        let se = summary_field(&summary, key, "standard_error");
        eprintln!("{key}: {e} ± {se} (truth {t}, {:.2} se)", (e - t) / se);
        assert!(
            se.is_finite() && se > 0.0 && se < 0.2 * t.abs(),
            "{key}: se {se}"
        );
        assert!((e - t).abs() <= 3.0 * se, "{key}: {e} ± {se}, truth {t}");
    }
    assert!(!summary.contains("not identifiable"), "{summary}");
    assert!(out.join("best.toml").is_file());
    assert!(out.join("compare-summary.csv").is_file());
    assert!(text.contains("concentration_chloride"), "{text}");
}
