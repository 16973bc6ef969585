//! `voxperm batch` and `voxperm report` end to end: the real binary on small periodic volumes
//! generated in a temporary folder (sphere cells and slits, 16³ or smaller), solved with a
//! loose tolerance to stay fast.
mod common;
use common::cli::{run_in, write_mask_with};
use common::{slit, sphere_cell};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant, SystemTime};
use voxperm::geometry::{Axis, PoreMask};
use voxperm::volume::{TiffCompression, Volume, write_tiff_stack};

const FAST: [&str; 5] = ["--periodic", "--tolerance", "1e-5", "--voxel-size", "2um"];

fn batch(cwd: &Path, source: &str, out: &str, extra: &[&str]) -> (i32, String, String) {
    let mut args = vec!["batch", source, "--out", out];
    args.extend_from_slice(&FAST);
    args.extend_from_slice(extra);
    run_in(cwd, &args)
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).expect("read")).expect("json")
}

fn mtime(p: &Path) -> SystemTime {
    std::fs::metadata(p).unwrap().modified().unwrap()
}

/// Three good samples and a corrupt one, in a folder.
fn sample_folder(dir: &Path) -> PathBuf {
    let s = dir.join("scans");
    std::fs::create_dir(&s).unwrap();
    write_mask(&s, "a-cell.tif", &sphere_cell(16, 6.0));
    write_mask(&s, "b-slit.tif", &slit(Axis::Y, 5, 8));
    write_mask(&s, "c-cell.tif", &sphere_cell(12, 4.0));
    std::fs::write(s.join("d-corrupt.tif"), b"II*\0 this is not really a TIFF").unwrap();
    s
}

#[test]
fn one_corrupt_file_fails_alone_and_the_summary_loads_with_units() {
    let dir = tempfile::tempdir().unwrap();
    sample_folder(dir.path());
    let (code, stdout, stderr) = batch(dir.path(), "scans", "res", &[]);
    assert_eq!(code, 5, "partial failure exit code\n{stdout}\n{stderr}");
    assert!(stderr.contains("[4/4] d-corrupt: failed: "), "{stderr}");
    let res = dir.path().join("res");
    for name in ["a-cell", "b-slit", "c-cell"] {
        let v = json(&res.join(format!("{name}.json")));
        assert_eq!(v["name"], name);
        assert_eq!(v["batch_key"].as_str().unwrap().len(), 64);
        assert!(v["flow_snapshot"]["histogram"]["counts"].is_array());
    }
    assert!(!res.join("d-corrupt.json").exists());

    let mut rd = csv::Reader::from_path(res.join("summary.csv")).expect("csv");
    let headers = rd.headers().unwrap().clone();
    let col = |h: &str| {
        headers
            .iter()
            .position(|x| x == h)
            .unwrap_or_else(|| panic!("no column {h}"))
    };
    for h in [
        "permeability_x_mD",
        "permeability_x_m2",
        "permeability_x_voxel2",
        "porosity_total",
        "porosity_connected_x",
        "tortuosity_x",
        "specific_surface_per_m",
        "kozeny_carman_mD",
        "kozeny_constant_implied_x",
        "pore_diameter_voxels",
        "steps",
        "converged",
        "wall_s",
        "status",
        "error",
    ] {
        col(h);
    }
    let rows: Vec<csv::StringRecord> = rd.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 4);
    let f = |r: &csv::StringRecord, h: &str| -> f64 {
        r[col(h)]
            .parse()
            .unwrap_or_else(|_| panic!("{h} = '{}'", &r[col(h)]))
    };
    for r in &rows[..3] {
        assert_eq!(&r[col("status")], "ok");
        assert_eq!(&r[col("error")], "");
        // Unit chain: m² = voxel² × (2 µm)²; 1 mD = 9.869233e-16 m² (NIST SP 811 App. B, from memory).
        let (md, m2, vox) = (
            f(r, "permeability_x_mD"),
            f(r, "permeability_x_m2"),
            f(r, "permeability_x_voxel2"),
        );
        assert!((m2 / (vox * 4e-12) - 1.0).abs() < 1e-9);
        assert!((md / (m2 / 9.869233e-16) - 1.0).abs() < 1e-6);
        assert!(f(r, "porosity_total") > 0.0 && f(r, "tortuosity_x") >= 1.0 - 1e-6);
        assert!(f(r, "steps") > 0.0 && f(r, "wall_s") >= 0.0);
        assert_eq!(&r[col("converged")], "true");
    }
    // The slit: 5 fluid layers in a period of 6 along y, flow along x (plane Poiseuille flow,
    // White, Viscous Fluid Flow): k = (25/12 + 1/24)·5/6 voxel²; the loose tolerance costs well under 1 %.
    let want = (25.0 / 12.0 + 1.0 / 24.0) * 5.0 / 6.0;
    let got = f(&rows[1], "permeability_x_voxel2");
    assert!((got / want - 1.0).abs() < 0.01, "slit k {got} vs {want}");
    let bad = &rows[3];
    assert_eq!(&bad[col("status")], "failed");
    assert!(bad[col("error")].contains("d-corrupt.tif"), "{:?}", bad);
    assert_eq!(&bad[col("permeability_x_mD")], "");
    assert!(
        stdout.contains("d-corrupt") && stdout.contains("failed"),
        "{stdout}"
    );
}

#[test]
fn rerun_redoes_only_missing_or_changed_samples() {
    let dir = tempfile::tempdir().unwrap();
    let scans = sample_folder(dir.path());
    std::fs::remove_file(scans.join("d-corrupt.tif")).unwrap();
    let (code, _, stderr) = batch(dir.path(), "scans", "res", &[]);
    assert_eq!(code, 0, "{stderr}");
    let res = dir.path().join("res");
    let c_json = res.join("c-cell.json");
    let (c_time, c_text) = (mtime(&c_json), std::fs::read_to_string(&c_json).unwrap());

    let (code, _, stderr) = batch(dir.path(), "scans", "res", &[]);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(stderr.matches("skipped (unchanged)").count(), 3, "{stderr}");

    // Lose one result, change one input: exactly those two are solved again.
    std::fs::remove_file(res.join("a-cell.json")).unwrap();
    write_mask(&scans, "b-slit.tif", &slit(Axis::Y, 4, 8));
    let (code, _, stderr) = batch(dir.path(), "scans", "res", &[]);
    assert_eq!(code, 0, "{stderr}");
    assert!(stderr.contains("[1/3] a-cell: porosity"), "{stderr}");
    assert!(stderr.contains("[2/3] b-slit: porosity"), "{stderr}");
    assert!(
        stderr.contains("[3/3] c-cell: skipped (unchanged)"),
        "{stderr}"
    );
    assert_eq!(mtime(&c_json), c_time);
    assert_eq!(std::fs::read_to_string(&c_json).unwrap(), c_text);
    assert!(res.join("a-cell.json").exists());
    let b = json(&res.join("b-slit.json"));
    assert!((b["porosity"].as_f64().unwrap() - 4.0 / 5.0).abs() < 1e-12);

    // Other settings make another key: nothing is skipped.
    let (code, _, stderr) = batch(dir.path(), "scans", "res", &["--tau", "0.8"]);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(stderr.matches("skipped").count(), 0, "{stderr}");
}

/// A batch of `scans` into `res` whose 32³ sample takes seconds (f32 populations never reach
/// the tolerance, so it runs the 3000 steps), for tests that interrupt it.
const SLOW_BATCH: [&str; 10] = [
    "batch",
    "scans",
    "--out",
    "res",
    "--periodic",
    "--tolerance",
    "1e-12",
    "--max-steps",
    "3000",
    "--quiet",
];

/// Waits until a running batch has written `first`, so an interrupt lands in a later sample.
fn wait_for_first_result(child: &mut std::process::Child, first: &Path) {
    let start = Instant::now();
    while !first.exists() {
        assert!(
            start.elapsed() < Duration::from_secs(60),
            "first result never appeared"
        );
        if let Some(status) = child.try_wait().unwrap() {
            panic!("batch ended before it could be interrupted: {status}");
        }
        std::thread::sleep(Duration::from_millis(10));
    }
}

#[test]
fn a_killed_batch_resumes_with_the_unfinished_samples() {
    let dir = tempfile::tempdir().unwrap();
    let s = dir.path().join("scans");
    std::fs::create_dir(&s).unwrap();
    // The middle sample is slow (a 32³ cell for 3000 steps: f32 populations never reach the
    // tolerance), so the kill lands while it runs; the others take a fraction of a second.
    write_mask(&s, "s1.tif", &sphere_cell(12, 4.0));
    write_mask(&s, "s2.tif", &sphere_cell(32, 11.0));
    write_mask(&s, "s3.tif", &sphere_cell(12, 3.0));
    let args = SLOW_BATCH;
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("voxperm"))
        .current_dir(dir.path())
        .args(args)
        .spawn()
        .expect("spawn");
    let res = dir.path().join("res");
    wait_for_first_result(&mut child, &res.join("s1.json"));
    child.kill().unwrap();
    child.wait().unwrap();
    let finished: Vec<bool> = ["s1", "s2", "s3"]
        .iter()
        .map(|n| res.join(format!("{n}.json")).exists())
        .collect();
    assert!(
        !finished[2],
        "the batch finished before the kill: make s2 slower"
    );
    // What was finished is on disk, whole, and the summary (rewritten just after each result
    // file, so it may lag by one) says what is still pending.
    json(&res.join("s1.json"));
    let summary = json(&res.join("summary.json"));
    assert!(["ok", "pending"].contains(&summary["samples"][0]["status"].as_str().unwrap()));
    assert_eq!(summary["samples"][2]["status"], "pending");

    let (code, _, stderr) = run_in(dir.path(), &args[..args.len() - 1]);
    assert_eq!(code, 0, "{stderr}");
    for (i, done) in finished.iter().enumerate() {
        let line = stderr
            .lines()
            .find(|l| l.starts_with(&format!("[{}/3] s{}:", i + 1, i + 1)))
            .unwrap_or_else(|| panic!("no line for s{}: {stderr}", i + 1));
        assert_eq!(line.contains("skipped (unchanged)"), *done, "{line}");
    }
    let summary = json(&res.join("summary.json"));
    for r in summary["samples"].as_array().unwrap() {
        assert_eq!(r["status"], "ok", "{r}");
    }
}

/// Ctrl-C mid-batch: exit 130, one line saying how to resume, finished results kept whole.
/// (The interrupt lands during a solve, when no write is in progress, so this does not test
/// the removal of temporary files; the no-.tmp check below only guards the folder.)
#[cfg(target_os = "linux")]
#[test]
fn an_interrupted_batch_says_how_to_resume() {
    let dir = tempfile::tempdir().unwrap();
    let s = dir.path().join("scans");
    std::fs::create_dir(&s).unwrap();
    write_mask(&s, "s1.tif", &sphere_cell(12, 4.0));
    write_mask(&s, "s2.tif", &sphere_cell(32, 11.0));
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("voxperm"))
        .current_dir(dir.path())
        .args(SLOW_BATCH)
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("spawn");
    let res = dir.path().join("res");
    wait_for_first_result(&mut child, &res.join("s1.json"));
    assert_eq!(unsafe { libc::kill(child.id() as i32, libc::SIGINT) }, 0);
    let out = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(130), "{stderr}");
    assert!(
        stderr.contains("interrupted") && stderr.contains("run the same batch again"),
        "{stderr}"
    );
    // Into a pipe (a log) the line starts on its own, with no blank line before it.
    assert!(
        stderr
            .lines()
            .any(|l| l.starts_with("voxperm: interrupted"))
            && !stderr.contains("\n\nvoxperm: interrupted"),
        "{stderr:?}"
    );
    json(&res.join("s1.json"));
    assert!(!res.join("s2.json").exists());
    for e in std::fs::read_dir(&res).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.ends_with(".tmp"), "temporary file left: {name}");
    }
}

#[test]
fn manifest_defaults_overrides_and_relative_paths() {
    let dir = tempfile::tempdir().unwrap();
    let m = dir.path().join("study");
    std::fs::create_dir_all(m.join("scans")).unwrap();
    write_mask(&m.join("scans"), "a.tif", &sphere_cell(12, 4.0));
    // Pore label 7 instead of 0: solid 255, pore 7.
    let mask = slit(Axis::Z, 4, 6);
    let p = m.join("scans").join("b.tif");
    write_tiff_stack(
        &p,
        &Volume::from_mask(&mask, 7, 255),
        TiffCompression::None,
        None,
    )
    .unwrap();
    // A file that records its own voxel size, 3 µm, which "file" brings back under the default.
    write_tiff_stack(
        &m.join("scans").join("c.tif"),
        &Volume::from_mask(&sphere_cell(12, 4.0), 0, 255),
        TiffCompression::None,
        Some(3e-6),
    )
    .unwrap();
    std::fs::write(
        m.join("plan.toml"),
        r#"
[defaults]
voxel_size = "2um"
periodic = true

[[sample]]
path = "scans/a.tif"
name = "alpha"

[[sample]]
path = "scans/b.tif"
voxel_size = "1um"
pore_label = 7
axis = "all"

[[sample]]
path = "scans/c.tif"
voxel_size = "file"
periodic = false
"#,
    )
    .unwrap();
    // Run from elsewhere: paths resolve against the manifest's folder, not the working one.
    let (code, stdout, stderr) = run_in(
        dir.path(),
        &[
            "batch",
            "study/plan.toml",
            "--out",
            "out",
            "--tolerance",
            "1e-5",
        ],
    );
    assert_eq!(code, 0, "{stdout}\n{stderr}");
    let a = json(&dir.path().join("out/alpha.json"));
    assert_eq!(a["voxel_size_m"].as_f64(), Some(2e-6));
    assert_eq!(a["axis"], "x");
    assert_eq!(a["settings"]["ends"], "periodic");
    assert_eq!(a["input"]["segmentation"], "pore labels 0");
    let b = json(&dir.path().join("out/b.json"));
    assert_eq!(b["voxel_size_m"].as_f64(), Some(1e-6));
    assert_eq!(b["axis"], "all");
    assert_eq!(b["input"]["segmentation"], "pore labels 7");
    assert_eq!(b["settings"]["sides"], "periodic");
    assert!((b["porosity"].as_f64().unwrap() - 4.0 / 5.0).abs() < 1e-12);
    let c = json(&dir.path().join("out/c.json"));
    // periodic = false under a periodic default: the scan default again.
    assert_eq!(c["settings"]["sides"], "sealed");
    assert_eq!(c["settings"]["ends"], "mirror");
    assert!(
        (c["voxel_size_m"].as_f64().unwrap() - 3e-6).abs() < 1e-12,
        "{}",
        c["voxel_size_m"]
    );
}

#[test]
fn manifest_mistakes_stop_the_batch_before_any_solve() {
    let dir = tempfile::tempdir().unwrap();
    write_mask(dir.path(), "a.tif", &sphere_cell(12, 4.0));
    let cases: [(&str, i32, &[&str]); 6] = [
        (
            "[[sample]]\npath = \"a.tif\"\npore_label = -1\n",
            2,
            &["sample 1", "pore_label must be a whole number", "not -1"],
        ),
        (
            "[[sample]]\npath = \"a.tif\"\npore_label = [0, \"3\"]\n",
            2,
            &["pore_label must be a whole number", "or a list of them"],
        ),
        (
            "[[sample]]\npath = \"a.tif\"\n[[sample]]\npath = \"a.tif\"\nname = \"beta\"\ncolour = \"red\"\n",
            2,
            &["colour", "beta", "sample 2"],
        ),
        (
            "[defaults]\nvoxel = \"2um\"\n[[sample]]\npath = \"a.tif\"\n",
            2,
            &["voxel", "[defaults]"],
        ),
        (
            "[[sample]]\npath = \"a.tif\"\nends = \"open\"\n",
            2,
            &["ends", "open"],
        ),
        ("[[sample]\npath = ", 3, &["plan.toml", "TOML"]),
    ];
    for (text, code, needles) in cases {
        std::fs::write(dir.path().join("plan.toml"), text).unwrap();
        let (got, _, stderr) = batch(dir.path(), "plan.toml", "out", &[]);
        assert_eq!(got, code, "{text}\n{stderr}");
        let lines: Vec<&str> = stderr.lines().collect();
        assert_eq!(lines.len(), 1, "{stderr}");
        for n in needles {
            assert!(lines[0].contains(n), "'{}' lacks '{n}'", lines[0]);
        }
        assert!(
            !dir.path().join("out").exists(),
            "{text}: results folder made"
        );
    }
    // A source that does not exist is a missing input (exit 3), named, with no results folder.
    let (got, _, stderr) = batch(dir.path(), "nosuch", "out", &[]);
    assert_eq!(got, 3, "{stderr}");
    assert!(
        stderr.contains("nosuch") && stderr.contains("no such file or folder"),
        "{stderr}"
    );
    assert!(!dir.path().join("out").exists());
    // The results folder is created, but not a missing folder around it (a typo there would
    // quietly start a fresh batch).
    std::fs::write(
        dir.path().join("plan.toml"),
        "[[sample]]\npath = \"a.tif\"\n",
    )
    .unwrap();
    let (got, _, stderr) = batch(dir.path(), "plan.toml", "typo/out", &[]);
    assert_eq!(got, 3, "{stderr}");
    assert!(
        stderr.contains("the folder typo does not exist"),
        "{stderr}"
    );
    assert!(!dir.path().join("typo").exists());
    // A report over a folder without result files names the folder.
    std::fs::create_dir(dir.path().join("empty")).unwrap();
    let (got, _, stderr) = run_in(dir.path(), &["report", "empty", "--out", "r.html"]);
    assert_eq!(got, 3, "{stderr}");
    assert!(
        stderr.contains("empty") && stderr.contains("no result files"),
        "{stderr}"
    );
    assert!(!dir.path().join("r.html").exists());
    // A huge file given as manifest is refused by its size, before it is read.
    let big = std::fs::File::create(dir.path().join("big.toml")).unwrap();
    big.set_len(1 << 30).unwrap();
    let (got, _, stderr) = batch(dir.path(), "big.toml", "out", &[]);
    assert_eq!(got, 3, "{stderr}");
    assert!(
        stderr.contains("big.toml") && stderr.contains("far more"),
        "{stderr}"
    );
}

/// A folder batch with `--raw-shape` runs the folder's TIFF stacks as well as its raw files
/// (docs/batch-manifest.md); the raw layout applies to the raw files only.
#[test]
fn folder_batch_with_raw_shape_keeps_the_tiff_stacks() {
    let dir = tempfile::tempdir().unwrap();
    let s = dir.path().join("scans");
    std::fs::create_dir(&s).unwrap();
    write_mask(&s, "stack.tif", &sphere_cell(10, 3.0));
    // A raw u8 volume 12x10x10 (x fastest), label 0 = pore: a cell with a solid sphere.
    let cell = sphere_cell(12, 4.0);
    let raw: Vec<u8> = (0..10)
        .flat_map(|z| (0..10).flat_map(move |y| (0..12).map(move |x| (x, y, z))))
        .map(|(x, y, z)| u8::from(!cell.is_pore(x, y, z)))
        .collect();
    std::fs::write(s.join("block.raw"), raw).unwrap();
    let (code, stdout, stderr) = batch(dir.path(), "scans", "res", &["--raw-shape", "12x10x10"]);
    assert_eq!(code, 0, "{stdout}\n{stderr}");
    let summary = json(&dir.path().join("res/summary.json")).to_string();
    assert!(
        summary.contains("\"stack\"") && summary.contains("\"block\""),
        "{summary}"
    );
    let stack = json(&dir.path().join("res/stack.json"));
    assert_eq!(stack["input"]["shape"].to_string(), "[10,10,10]");
    let block = json(&dir.path().join("res/block.json"));
    assert_eq!(block["input"]["shape"].to_string(), "[12,10,10]");
    // With no raw file left the option is unused, and the user is told.
    std::fs::remove_file(s.join("block.raw")).unwrap();
    let (code, _, stderr) = batch(dir.path(), "scans", "res2", &["--raw-shape", "12x10x10"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(stderr.contains("holds no .raw file"), "{stderr}");
}

/// Two stacks of one name in a folder batch: refused before any solve, with advice that fits
/// a folder (no manifest to set a name in).
#[test]
fn folder_batch_names_the_clashing_file() {
    let dir = tempfile::tempdir().unwrap();
    let s = dir.path().join("scans");
    std::fs::create_dir(&s).unwrap();
    write_mask(&s, "a.tif", &sphere_cell(10, 3.0));
    write_mask(&s, "a.tiff", &sphere_cell(10, 3.0));
    let (code, _, stderr) = batch(dir.path(), "scans", "res", &[]);
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains("two samples are named 'a'")
            && stderr.contains("rename scans/a.tiff")
            && stderr.contains("manifest"),
        "{stderr}"
    );
    assert!(!dir.path().join("res").exists());
}

/// A log reader that quit (`batch … 2>&1 | head -1`) must not stop the batch or make it panic:
/// with standard error a broken pipe from the start, every sample still runs and the summary
/// agrees with the result files.
#[test]
fn batch_runs_on_when_standard_error_is_a_broken_pipe() {
    let dir = tempfile::tempdir().unwrap();
    let s = dir.path().join("scans");
    std::fs::create_dir(&s).unwrap();
    write_mask(&s, "a.tif", &sphere_cell(10, 3.0));
    write_mask(&s, "b.tif", &sphere_cell(10, 4.0));
    let (reader, writer) = std::io::pipe().unwrap();
    drop(reader);
    let mut args = vec!["batch", "scans", "--out", "res"];
    args.extend_from_slice(&FAST);
    let out = std::process::Command::new(assert_cmd::cargo::cargo_bin("voxperm"))
        .current_dir(dir.path())
        .args(&args)
        .stderr(writer)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stdout)
    );
    let summary = json(&dir.path().join("res/summary.json"));
    let text = summary.to_string();
    assert!(!text.contains("pending"), "{text}");
    for name in ["a", "b"] {
        assert!(dir.path().join(format!("res/{name}.json")).exists());
    }
}

#[test]
fn report_is_self_contained_with_table_plots_methods_and_cautions() {
    let dir = tempfile::tempdir().unwrap();
    sample_folder(dir.path());
    let (code, _, stderr) = batch(dir.path(), "scans", "res", &[]);
    assert_eq!(code, 5, "{stderr}");
    // A result left from an earlier batch into the folder, of a sample no longer in it.
    let mut stale = json(&dir.path().join("res/a-cell.json"));
    stale["name"] = "zz-stale-sample".into();
    std::fs::write(
        dir.path().join("res/zz-stale-sample.json"),
        stale.to_string(),
    )
    .unwrap();
    let (code, _, stderr) = run_in(
        dir.path(),
        &[
            "report",
            "res",
            "--out",
            "report.html",
            "--markdown",
            "report.md",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("skipped the result 'zz-stale-sample'"),
        "{stderr}"
    );
    let html = std::fs::read_to_string(dir.path().join("report.html")).unwrap();
    assert!(!html.contains("zz-stale-sample"));
    // Printed, the wide comparison table shrinks onto the page instead of scrolling off it.
    assert!(html.contains("@media print{"), "no print layout");
    for needle in [
        "<table",
        "Comparison of samples",
        "a-cell",
        "b-slit",
        "c-cell",
        "k (mD)",
        "k (m²)",
        "anisotropy",
        "Kozeny–Carman k (mD)",
        "pore diameter (voxels)",
        "converged (steps per axis)",
        // The failed sample with its error.
        "d-corrupt",
        "d-corrupt.tif",
        // Axis labels with units, in the SVG text.
        "porosity φ (–)",
        "permeability k (mD)",
        "hydraulic tortuosity Σ|u| / Σu_axis (–)",
        "local speed |u| / mean speed ⟨|u|⟩ (–)",
        "fluid nodes per bin (%)",
        "y (µm)",
        "z (µm)",
        "|u| / ⟨|u|⟩ (–)",
        // Methods from the recorded settings, and the cautions.
        "id=\"methods\"",
        "D3Q19",
        "two-relaxation-time (TRT)",
        "Λ = (τ⁺ − ½)(τ⁻ − ½) = 0.1875",
        "below 1e-5",
        "sides periodic, ends periodic",
        "only clusters that carry flow from inlet to outlet",
        "id=\"cautions\"",
        voxperm::report::json::CAUTION,
    ] {
        assert!(html.contains(needle), "report lacks '{needle}'");
    }
    // 3 comparison plots + speed histogram and map for each of the 3 samples.
    assert_eq!(html.matches("<svg ").count(), 9);
    let outside = html
        .match_indices("http")
        .filter(|(i, _)| !html[*i..].starts_with("http://www.w3.org/2000/svg\""))
        .count();
    assert_eq!(outside, 0, "the page refers to something outside itself");
    assert!(!html.contains("<script") && !html.contains("<link") && !html.contains("src="));

    let md = std::fs::read_to_string(dir.path().join("report.md")).unwrap();
    assert!(md.contains("## Methods") && md.contains("## Cautions"));
    // Plain text stays plain: no HTML entities where a bare & or < cannot start markup.
    assert!(md.contains("(Koponen, Kataja & Timonen 1996)"), "{md}");
    assert!(!md.contains("&amp;") && !md.contains("&lt;"), "{md}");
    let svgs: Vec<&str> = md
        .lines()
        .filter_map(|l| l.strip_prefix("![").and_then(|l| l.split("](").nth(1)))
        .map(|l| l.trim_end_matches(')'))
        .collect();
    assert_eq!(svgs.len(), 9, "{md}");
    for f in svgs {
        let svg = std::fs::read_to_string(dir.path().join(f)).unwrap();
        assert!(svg.starts_with("<svg"), "{f}");
    }
    // The scatter plots name their points; the speed map places its plane in both units.
    for plot in ["permeability-porosity", "tortuosity-porosity"] {
        let svg = std::fs::read_to_string(dir.path().join(format!("report-{plot}.svg"))).unwrap();
        for name in ["a-cell", "b-slit", "c-cell"] {
            assert!(
                svg.contains(&format!(">\n{name}\n<")),
                "{plot} lacks {name}"
            );
        }
    }
    let map = std::fs::read_to_string(dir.path().join("report-a-cell-speed-map.svg")).unwrap();
    assert!(
        map.contains("a-cell: speed at x = 8 voxels (16 µm)"),
        "{map}"
    );
}

#[test]
fn report_reads_single_estimate_results_too() {
    let dir = tempfile::tempdir().unwrap();
    let sample = write_mask(dir.path(), "cell.tif", &sphere_cell(12, 4.0));
    let (code, _, stderr) = run_in(
        dir.path(),
        &[
            "estimate",
            sample.to_str().unwrap(),
            "--json",
            "cell.json",
            "--periodic",
            "--tolerance",
            "1e-5",
            "-q",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    let (code, _, stderr) = run_in(dir.path(), &["report", "cell.json", "--out", "r.html"]);
    assert_eq!(code, 0, "{stderr}");
    let html = std::fs::read_to_string(dir.path().join("r.html")).unwrap();
    // No voxel size: permeability in voxel², map axes in voxels.
    assert!(html.contains("permeability k (voxel²)") && html.contains("y (voxels)"));
    assert!(html.contains("cell: speed at x = 6 voxels\n"), "{html}");
    let (code, _, stderr) = run_in(dir.path(), &["report", "cell.json"]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("--out"), "{stderr}");
    // A Markdown plot file that would replace the HTML page is refused before anything is
    // written.
    let (code, _, stderr) = run_in(
        dir.path(),
        &[
            "report",
            "cell.json",
            "--markdown",
            "m.md",
            "--out",
            "m-permeability-bars.svg",
        ],
    );
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains("a plot of --markdown and --out name the same file"),
        "{stderr}"
    );
    assert!(
        !dir.path().join("m.md").exists() && !dir.path().join("m-permeability-bars.svg").exists()
    );
}

fn write_mask(dir: &Path, name: &str, mask: &PoreMask) -> PathBuf {
    write_mask_with(dir, name, mask, TiffCompression::None)
}

/// report given a file that is not JSON (the batch's summary.csv, say) names it and says what
/// report takes, instead of a bare parser message.
#[test]
fn report_of_a_non_json_file_says_what_it_takes() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("summary.csv"), "name,k_mD\na,1\n").unwrap();
    let (code, _, stderr) = run_in(dir.path(), &["report", "summary.csv", "--out", "r.html"]);
    assert_eq!(code, 3, "{stderr}");
    assert!(
        stderr.contains("summary.csv: not a voxperm result file: it is not JSON")
            && stderr.contains("give result .json files or a batch's results folder"),
        "{stderr}"
    );
    assert!(!dir.path().join("r.html").exists());
}

/// A sample whose flow crosses voxel-edge gaps (a staircase wall one voxel thick) carries its
/// warning into the batch summary (count and text, beside a clean sample with none), the
/// console line, and the report: its name in the comparison table says so and a caution
/// names it. A sample sealed by a two-voxel wall gets the status "no path", not "failed".
#[test]
fn edge_gap_warnings_reach_the_summary_and_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let s = dir.path().join("walls");
    std::fs::create_dir(&s).unwrap();
    write_mask(
        &s,
        "stair.tif",
        &PoreMask::from_fn([24, 8, 8], |x, y, _| x != 10 + y % 2),
    );
    write_mask(&s, "slit.tif", &slit(Axis::Y, 5, 8));
    write_mask(
        &s,
        "closed.tif",
        &PoreMask::from_fn([24, 8, 8], |x, _, _| !(10..12).contains(&x)),
    );
    let (code, stdout, stderr) = batch(dir.path(), "walls", "res", &["--axis", "x"]);
    assert_eq!(code, 5, "{stdout}\n{stderr}");
    assert!(stderr.contains("closed: no path: "), "{stderr}");
    let rows = json(&dir.path().join("res/summary.json"))["samples"].clone();
    let row = |name: &str| {
        rows.as_array()
            .unwrap()
            .iter()
            .find(|r| r["name"] == name)
            .unwrap_or_else(|| panic!("{name}: {rows}"))
            .clone()
    };
    let stair = row("stair");
    assert!(stair["warning_count"].as_u64().unwrap() >= 1, "{stair}");
    assert!(
        stair["warnings"]
            .as_str()
            .unwrap()
            .contains("joins the faces only across voxel edges"),
        "{stair}"
    );
    let closed = row("closed");
    assert_eq!(closed["status"], "no path", "{closed}");
    assert!(
        closed["error"]
            .as_str()
            .unwrap()
            .contains("no percolating pore path along x"),
        "{closed}"
    );
    let clean = row("slit");
    assert_eq!(clean["warning_count"], 0, "{clean}");
    assert_eq!(clean["warnings"], "", "{clean}");
    assert!(
        clean["kozeny_carman_voxel2"].as_f64().unwrap() > 0.0,
        "{clean}"
    );
    let mut rd = csv::Reader::from_path(dir.path().join("res/summary.csv")).unwrap();
    let headers = rd.headers().unwrap().clone();
    assert!(headers.iter().any(|h| h == "warnings"), "{headers:?}");
    assert!(stderr.contains("warning"), "{stderr}");
    let (code, _, stderr) = run_in(dir.path(), &["report", "res", "--markdown", "r.md"]);
    assert_eq!(code, 0, "{stderr}");
    let md = std::fs::read_to_string(dir.path().join("r.md")).unwrap();
    assert!(
        md.contains("stair (1 warning)") || md.contains("stair (2 warnings)"),
        "{md}"
    );
    assert!(
        md.contains(
            "one-voxel walls), which the image does not resolve; k may be far too high: stair."
        ),
        "{md}"
    );
    assert!(!md.contains("slit (1 warning"), "{md}");
    assert!(md.contains("no percolating path: k = 0"), "{md}");
    assert!(md.contains("- **closed**: "), "{md}");
}

/// A result file written before the edge-gap warning covered part of the pore space lacks it,
/// and a rerun of the same version resumes that file instead of solving again: the warning is
/// worked out from the file's recorded porosities, so the summary counts it and the report
/// cautions about the sample all the same (and it is not given twice for a file that has it).
#[test]
fn an_older_result_without_the_edge_gap_share_warning_still_gets_it() {
    let dir = tempfile::tempdir().unwrap();
    let s = dir.path().join("walls");
    std::fs::create_dir(&s).unwrap();
    // A straight channel (z < 3) and, between solid planes z = 3 and z = 7, a second one across
    // which a one-voxel staircase wall stands: about half the connected pore space is reached
    // only across edge gaps.
    write_mask(
        &s,
        "beside.tif",
        &PoreMask::from_fn([24, 8, 8], |x, y, z| {
            z != 3 && z != 7 && (z < 3 || x != 10 + y % 2)
        }),
    );
    let (code, stdout, stderr) = batch(dir.path(), "walls", "res", &["--axis", "x"]);
    assert_eq!(code, 0, "{stdout}\n{stderr}");
    let warned = |rows: &serde_json::Value| {
        let row = &rows["samples"][0];
        (
            row["warning_count"].as_u64().unwrap(),
            row["warnings"]
                .as_str()
                .unwrap()
                .matches("of the connected pore space joins the flow only across voxel edges")
                .count(),
        )
    };
    let (count, shares) = warned(&json(&dir.path().join("res/summary.json")));
    assert_eq!(shares, 1);
    // The result as an older voxperm of the same version wrote it: without that warning.
    let result = dir.path().join("res/beside.json");
    let mut v = json(&result);
    let ws = v["warnings"].as_array_mut().unwrap();
    ws.retain(|w| !w.as_str().unwrap().contains("only across voxel edges"));
    assert_eq!(ws.len() as u64, count - 1);
    std::fs::write(&result, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    let (code, stdout, stderr) = batch(dir.path(), "walls", "res", &["--axis", "x"]);
    assert_eq!(code, 0, "{stdout}\n{stderr}");
    assert!(stderr.contains("skipped (unchanged)"), "{stderr}");
    assert_eq!(
        warned(&json(&dir.path().join("res/summary.json"))),
        (count, 1)
    );
    let (code, _, stderr) = run_in(dir.path(), &["report", "res", "--markdown", "r.md"]);
    assert_eq!(code, 0, "{stderr}");
    let md = std::fs::read_to_string(dir.path().join("r.md")).unwrap();
    assert!(md.contains("k may be far too high: beside."), "{md}");
}
