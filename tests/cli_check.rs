//! `voxperm check --quick` inside the test suite: the real binary runs the reference cases
//! (analytic channels, Zick & Homsy spheres, dilute cubic series, Sangani & Acrivos and
//! Drummond & Tahir cylinders, Kozeny–Carman pack; sources and tolerances in
//! src/analysis/check.rs and src/analysis/references.rs) and every case must pass. Also: a case
//! held to an impossible tolerance is reported as failing, so the suite can fail.

use assert_cmd::Command;
use voxperm::analysis::check::{Level, cases, run_case};

#[test]
fn check_quick_passes_every_case() {
    let dir = tempfile::tempdir().unwrap();
    let json = dir.path().join("check.json");
    let out = Command::cargo_bin("voxperm")
        .unwrap()
        .args(["check", "--quick", "--json", json.to_str().unwrap()])
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    println!("{stdout}");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).expect("check JSON")).unwrap();
    let rows = v["rows"].as_array().unwrap();
    assert_eq!(rows.len(), cases().len());
    for r in rows {
        assert!(
            r["pass"].as_bool().unwrap(),
            "{} failed: {r}\n{stdout}\n{stderr}",
            r["case"]
        );
        let err = r["error"].as_f64().unwrap();
        let expected = r["expected_error"].as_f64().unwrap();
        let tol = r["tolerance"].as_f64().unwrap();
        assert!(
            (err - expected).abs() <= tol,
            "{}: {err} vs {expected} ± {tol}",
            r["case"]
        );
        assert!(r["source"].as_str().is_some_and(|s| !s.is_empty()));
        // Every case names its source; values recalled from memory say so in the table.
        if r["from_memory"].as_bool().unwrap() {
            assert!(r["source"].as_str().unwrap().contains("from memory"));
        }
    }
    assert_eq!(v["failed"], 0);
    assert_eq!(out.status.code(), Some(0), "{stdout}\n{stderr}");
    // One table line per case, each with its verdict.
    for c in cases() {
        let line = stdout
            .lines()
            .find(|l| l.starts_with(&c.name))
            .unwrap_or_else(|| panic!("no row for {}", c.name));
        assert!(line.contains("pass"), "{line}");
    }
}

#[test]
fn a_case_outside_its_tolerance_fails() {
    // The slit's nodal flux exceeds h²/12 by exactly 1/(2N²), 1.389 % at N = 6, up to
    // round-off (about 1e-7), and the check is on the departure from that: 1e-12 must fail,
    // the real 1e-4 pass.
    let mut slit = cases()
        .into_iter()
        .find(|c| c.name.starts_with("slit"))
        .unwrap();
    slit.quick = vec![(6, 1e-12)];
    let row = run_case(&slit, Level::Quick, 1 << 30);
    assert!(row.failure.is_none(), "{:?}", row.failure);
    assert!(!row.pass, "error {} passed a 1e-12 tolerance", row.error);
    assert!((row.expected_error - 1.0 / 72.0).abs() < 1e-15);
    assert!((row.error - 1.0 / 72.0).abs() < 1e-5, "error {}", row.error);
    slit.quick = vec![(6, 1e-4)];
    assert!(run_case(&slit, Level::Quick, 1 << 30).pass);
}

#[test]
fn bad_check_options_are_usage_errors() {
    let out = Command::cargo_bin("voxperm")
        .unwrap()
        .args(["check", "--threads", "0"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let out = Command::cargo_bin("voxperm")
        .unwrap()
        .args(["check", "--json", "/no/such/folder/c.json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(3));
    assert_eq!(String::from_utf8_lossy(&out.stderr).lines().count(), 1);
}
