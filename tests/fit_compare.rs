//! Observation files are read with one-line errors naming the line, and `deepdry compare`
//! reproduces statistics known by construction: observations equal to the model give
//! zero bias and χ²; observations offset by one σ give a bias of −σ and a weighted RMSE
//! of 1 (derived from the definitions); between cell centres the model value is the
//! linear interpolation (common practice).

mod support;

use deepdry::fit::compare::{interpolate, match_observations, statistics};
use deepdry::fit::observations::{parse, Quantity};
use std::path::Path;
use support::{arg, assert_one_line_error, deepdry, run_ok, Scratch};

fn parse_err(text: &str) -> String {
    parse(text, Path::new("obs.csv")).unwrap_err().to_string()
}

#[test]
fn observation_files_are_read_and_bad_rows_named_by_line() {
    let ok = parse(
        "# a comment\ntime_year,depth_m,quantity,value,sigma\n1,2.5,temperature_C,18.4,0.2\n1,3,concentration_chloride,120,10\n",
        Path::new("obs.csv"),
    )
    .unwrap();
    assert_eq!(ok.rows.len(), 2);
    assert_eq!(ok.rows[0].line, 3);
    assert_eq!(
        ok.rows[1].quantity,
        Quantity::Concentration("chloride".into())
    );
    let h = "time_year,depth_m,quantity,value,sigma\n";
    for (text, words) in [
        (
            "depth,value\n1,2\n",
            vec![
                "obs.csv:1:",
                "header",
                "time_year,depth_m,quantity,value,sigma",
            ],
        ),
        ("", vec!["obs.csv: empty"]),
        (h, vec!["no observations"]),
        (
            "time_year,depth_m,quantity,value,sigma\n1,2,pressure,3,1\n",
            vec!["obs.csv:2:", "quantity = `pressure`", "log10_suction_m"],
        ),
        (
            "time_year,depth_m,quantity,value,sigma\n1,2,head_m,-3,0\n",
            vec!["obs.csv:2:", "sigma = 0", "> 0"],
        ),
        (
            "time_year,depth_m,quantity,value,sigma\n1,-2,head_m,-3,1\n",
            vec!["obs.csv:2:", "depth_m = -2", "≥ 0"],
        ),
        (
            "time_year,depth_m,quantity,value,sigma\n1,2,head_m,abc,1\n",
            vec!["obs.csv:2:", "value = `abc`", "finite number"],
        ),
        (
            "time_year,depth_m,quantity,value,sigma\n1,2,head_m,inf,1\n",
            vec!["obs.csv:2:", "finite number"],
        ),
        (
            "time_year,depth_m,quantity,value,sigma\n1,2,head_m\n",
            vec!["obs.csv:2:", "3 cells"],
        ),
        (
            "time_year,depth_m,quantity,value,sigma\n1,2,liquid_content,1.5,0.1\n",
            vec!["obs.csv:2:", "[0, 1]"],
        ),
        (
            "time_year,depth_m,quantity,value,sigma\n1,2,concentration_,1,1\n",
            vec!["obs.csv:2:", "concentration_<solute>"],
        ),
    ] {
        let e = parse_err(text);
        assert!(!e.contains('\n'), "{e}");
        for w in words {
            assert!(e.contains(w), "{text:?}: `{e}` lacks `{w}`");
        }
    }
}

#[test]
fn interpolation_is_linear_between_centres_and_constant_beyond() {
    let z = [0.5, 1.5, 3.0];
    let v = [10.0, 20.0, 50.0];
    assert_eq!(interpolate(&z, &v, 1.0), 15.0);
    assert_eq!(interpolate(&z, &v, 2.25), 35.0);
    assert_eq!(interpolate(&z, &v, 0.0), 10.0);
    assert_eq!(interpolate(&z, &v, 9.0), 50.0);
    assert_eq!(interpolate(&z, &v, 1.5), 20.0);
}

#[test]
fn compare_recovers_statistics_known_by_construction() {
    let dir = Scratch::new("compare");
    let case = Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/quickstart.toml");
    let out = dir.join("run");
    run_ok(
        &case,
        &out,
        &[
            "--set",
            "time.end_year=20.0",
            "--set",
            "output.times_year=[1.0, 10.0]",
        ],
    );
    let results = out.join("results.h5");
    let res = {
        let _g = support::h5_guard();
        deepdry::plot::data::read(&results).unwrap()
    };
    let k = deepdry::fit::compare::profile_at(&res.profiles.time, 10.0).unwrap();
    // Observations at cell centres, equal to the model, then offset by +σ.
    let sigma = 0.25;
    let mut exact = String::from("time_year,depth_m,quantity,value,sigma\n");
    let mut offset = exact.clone();
    for i in (0..res.depth.len()).step_by(10) {
        let z = res.depth[i];
        let t = res.profiles.temperature[k][i];
        let s = (-res.profiles.head[k][i]).max(1e-3).log10();
        exact.push_str(&format!(
            "10,{z},temperature_C,{t},{sigma}\n10,{z},log10_suction_m,{s},{sigma}\n"
        ));
        offset.push_str(&format!(
            "10,{z},temperature_C,{},{sigma}\n10,{z},log10_suction_m,{},{sigma}\n",
            t + sigma,
            s + sigma
        ));
    }
    let obs = parse(&exact, Path::new("exact.csv")).unwrap();
    let st = statistics(&match_observations(&res, &obs).unwrap());
    assert_eq!(st.len(), 2);
    for s in &st {
        assert!(s.bias.abs() < 1e-12 && s.chi_square < 1e-20, "{s:?}");
    }
    let obs = parse(&offset, Path::new("offset.csv")).unwrap();
    let st = statistics(&match_observations(&res, &obs).unwrap());
    for s in &st {
        assert!((s.bias + sigma).abs() < 1e-9, "{s:?}");
        assert!((s.weighted_rmse - 1.0).abs() < 1e-9, "{s:?}");
        assert!((s.rmse - sigma).abs() < 1e-9, "{s:?}");
        assert!((s.chi_square - s.count as f64).abs() < 1e-6, "{s:?}");
    }
    // Through the command: the table, the CSV files and one figure per quantity.
    let obs_path = dir.write("obs.csv", &offset);
    let cmp = dir.join("cmp");
    let o = deepdry(&["compare", arg(&results), arg(&obs_path), "--out", arg(&cmp)]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    for f in [
        "compare-summary.csv",
        "compare-observations.csv",
        "compare-temperature_C.svg",
        "compare-log10_suction_m.png",
    ] {
        assert!(cmp.join(f).is_file(), "{f} missing");
    }
    let summary = std::fs::read_to_string(cmp.join("compare-summary.csv")).unwrap();
    assert!(summary.starts_with("quantity,unit,count,bias,rmse,weighted_rmse,chi_square\n"));
    // An observation time the run did not write is refused with the remedy.
    let late = dir.write(
        "late.csv",
        "time_year,depth_m,quantity,value,sigma\n15,1,temperature_C,20,0.1\n",
    );
    let o = deepdry(&["compare", arg(&results), arg(&late), "--out", arg(&cmp)]);
    assert_one_line_error(
        &o,
        2,
        &[
            "late.csv:2:",
            "no profile at that time",
            "output.times_year",
        ],
    );
}
