//! Malformed case files give one clear line and exit code 2.
//!
//! Each `tests/bad_cases/*.toml` starts with `# expect: <fragment>`: the fragment its error
//! message must contain (file:line:column where the error has a place, the key path, the
//! offending value and what is allowed).

use deepdry::error::Error;
use std::path::{Path, PathBuf};
use std::process::Command;

fn bad_cases() -> Vec<(PathBuf, String)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad_cases");
    let mut out = Vec::new();
    for entry in std::fs::read_dir(&dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "toml") {
            let text = std::fs::read_to_string(&path).unwrap();
            let first = text.lines().next().unwrap_or("");
            let fragment = first
                .strip_prefix("# expect: ")
                .unwrap_or_else(|| panic!("{}: first line must be `# expect: …`", path.display()))
                .to_string();
            out.push((path, fragment));
        }
    }
    out.sort();
    out
}

#[test]
fn every_bad_case_gives_its_one_line_input_error() {
    let cases = bad_cases();
    assert!(cases.len() >= 15, "only {} bad cases", cases.len());
    for (path, fragment) in &cases {
        match deepdry::case::load(path) {
            Err(Error::Input(msg)) => {
                assert!(
                    msg.contains(fragment.as_str()),
                    "{}:\n  message: {msg}\n  lacks:   {fragment}",
                    path.display()
                );
                assert!(
                    !msg.contains('\n'),
                    "{}: not one line: {msg}",
                    path.display()
                );
            }
            Err(e) => panic!("{}: not an input error: {e:?}", path.display()),
            Ok(_) => panic!("{}: accepted", path.display()),
        }
    }
}

#[test]
fn binary_exits_2_with_one_line_on_stderr() {
    for (path, fragment) in bad_cases() {
        let out = Command::new(env!("CARGO_BIN_EXE_deepdry"))
            .arg("check")
            .arg(&path)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{}: {stderr}", path.display());
        assert!(
            out.stdout.is_empty(),
            "{}: printed a summary",
            path.display()
        );
        assert_eq!(stderr.lines().count(), 1, "{}: {stderr}", path.display());
        assert!(stderr.starts_with("deepdry: error: "), "{stderr}");
        assert!(stderr.contains(&fragment), "{}: {stderr}", path.display());
    }
}

#[test]
fn missing_case_file_is_an_input_error() {
    let out = Command::new(env!("CARGO_BIN_EXE_deepdry"))
        .args(["check", "tests/bad_cases/there-is-no-such-case.toml"])
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(stderr.lines().count(), 1);
    assert!(stderr.contains("there-is-no-such-case.toml: cannot read the case file"));
}

/// Inline cases for messages that need no file on disk.
fn parse_err(text: &str) -> String {
    match deepdry::case::parse(text, "inline.toml", Path::new(".")) {
        Err(Error::Input(msg)) => msg,
        Err(e) => panic!("not an input error: {e:?}"),
        Ok(_) => panic!("accepted:\n{text}"),
    }
}

#[test]
fn inline_messages() {
    // Syntax error on line 2, column 7.
    let m = parse_err("title = \"x\"\n[time\nend_year = 1\n");
    assert!(m.starts_with("inline.toml:2:"), "{m}");
    assert!(m.contains("TOML syntax error"), "{m}");
    // Root-level wrong type.
    let m = parse_err("title = 5\n");
    assert!(
        m.contains("inline.toml:1:9: title = 5: expected a string, found an integer"),
        "{m}"
    );
    // Missing [time] comes first: time is read before the rest.
    let m = parse_err("title = \"x\"\n");
    assert!(m.contains("inline.toml: missing section [time]"), "{m}");
    // A section that must be a table.
    let m = parse_err("column = 3\n[time]\nend_year = 1\n");
    assert!(
        m.contains("column = 3: expected a table, found an integer"),
        "{m}"
    );
}
