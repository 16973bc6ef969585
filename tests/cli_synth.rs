//! `voxperm synth` end to end: every kind writes a volume whose porosity matches what it prints
//! and what its JSON says; one seed gives one file, byte for byte; the voxel size survives the
//! round trip into `estimate`'s reader; bad options fail with exit code 2, one line, no file.

mod common;
use common::cli::run;
use std::path::{Path, PathBuf};
use voxperm::volume::{ReadLimits, Segmentation, VoxelData, load, segment};

/// Runs `synth` with `args` writing `name` (and `name.json`) in `dir`; asserts success and
/// returns the paths and stdout.
fn synth(dir: &Path, name: &str, args: &[&str]) -> (PathBuf, PathBuf, String) {
    let out = dir.join(name);
    let json = dir.join(format!("{name}.json"));
    let mut all: Vec<&str> = vec!["synth"];
    all.extend_from_slice(args);
    all.extend_from_slice(&[
        "--out",
        out.to_str().unwrap(),
        "--json",
        json.to_str().unwrap(),
    ]);
    let (code, stdout, stderr) = run(&all);
    assert_eq!(code, 0, "args {all:?}\nstdout: {stdout}\nstderr: {stderr}");
    (out, json, stdout)
}

fn read_json(p: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

/// The number after "porosity" in the printed summary.
fn printed_porosity(stdout: &str) -> f64 {
    let line = stdout
        .lines()
        .find(|l| l.starts_with("porosity"))
        .unwrap_or_else(|| panic!("no porosity line in {stdout}"));
    line.split_whitespace().nth(1).unwrap().parse().unwrap()
}

const KINDS: &[(&str, &[&str])] = &[
    (
        "sphere-array",
        &[
            "sphere-array",
            "--lattice",
            "bcc",
            "--solid-fraction",
            "0.3",
            "--cell",
            "16",
        ],
    ),
    (
        "cylinder-array",
        &[
            "cylinder-array",
            "--packing",
            "hexagonal",
            "--solid-fraction",
            "0.2",
            "--cell",
            "15",
            "--axis",
            "y",
            "--cells",
            "2x1",
        ],
    ),
    (
        "sphere-pack",
        &[
            "sphere-pack",
            "--size",
            "32",
            "--porosity",
            "0.6",
            "--radius",
            "4",
            "--radius-spread",
            "0.1",
            "--radius-dist",
            "uniform",
            "--seed",
            "3",
        ],
    ),
    (
        "overlapping-spheres",
        &[
            "overlapping-spheres",
            "--size",
            "32x24x20",
            "--porosity",
            "0.5",
            "--radius",
            "3",
            "--stretch-axis",
            "z",
            "--aspect",
            "2",
            "--seed",
            "4",
        ],
    ),
    (
        "fibres",
        &[
            "fibres",
            "--size",
            "32",
            "--porosity",
            "0.85",
            "--radius",
            "1.5",
            "--orientation",
            "planar",
            "--normal",
            "z",
            "--seed",
            "5",
        ],
    ),
    (
        "foam",
        &[
            "foam",
            "--size",
            "32",
            "--porosity",
            "0.9",
            "--cell-size",
            "10",
            "--seed",
            "6",
        ],
    ),
    (
        "slits",
        &[
            "slits", "--size", "4x4x12", "--normal", "z", "--gap", "4", "--period", "6",
        ],
    ),
    (
        "duct",
        &["duct", "--side", "6", "--axis", "y", "--length", "3"],
    ),
    ("tube", &["tube", "--radius", "4.5", "--length", "2"]),
];

#[test]
fn every_kind_writes_the_porosity_it_prints_and_records() {
    let dir = tempfile::tempdir().unwrap();
    for (name, args) in KINDS {
        let mut args = args.to_vec();
        args.extend_from_slice(&["--voxel-size", "2.5um"]);
        let (tif, json, stdout) = synth(dir.path(), &format!("{name}.tif"), &args);
        let v = read_json(&json);
        let vol = load(&tif, None, &ReadLimits::new(1 << 30)).unwrap();
        // Pore = 0, solid = 255, nothing else.
        let VoxelData::U8(bytes) = &vol.data else {
            panic!("{name}: not u8")
        };
        assert!(bytes.iter().all(|&b| b == 0 || b == 255), "{name}");
        let mask = segment(&vol, &Segmentation::default(), None).unwrap();
        let from_file = mask.porosity();
        let recorded = v["porosity"].as_f64().unwrap();
        assert!(
            (recorded - from_file).abs() < 1e-12,
            "{name}: {recorded} vs {from_file}"
        );
        assert!(
            (printed_porosity(&stdout) - from_file).abs() < 5e-5,
            "{name}: {stdout}"
        );
        let shape: Vec<usize> = v["shape"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_u64().unwrap() as usize)
            .collect();
        assert_eq!(shape, vol.shape.to_vec(), "{name}");
        // The voxel size is in the TIFF, where estimate's reader finds it.
        let dx = vol
            .voxel_size
            .as_ref()
            .expect("voxel size in the TIFF")
            .metres;
        assert!((dx / 2.5e-6 - 1.0).abs() < 1e-9, "{name}: {dx}");
        assert_eq!(v["voxel_size_m"].as_f64().unwrap(), 2.5e-6);
        assert_eq!(
            v["output"]["sha256"].as_str().unwrap(),
            voxperm::volume::sample::input_sha256(&tif).unwrap()
        );
        assert!(
            stdout.contains("next        voxperm estimate") && stdout.contains("--periodic"),
            "{name}: {stdout}"
        );
    }
}

#[test]
fn the_estimate_hint_runs_on_the_written_file() {
    let dir = tempfile::tempdir().unwrap();
    let (_, json, _) = synth(
        dir.path(),
        "duct.tif",
        &["duct", "--side", "5", "--axis", "z", "--voxel-size", "1um"],
    );
    let hint = read_json(&json)["estimate_command"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(hint.contains("--axis z"), "{hint}");
    let words: Vec<&str> = hint.split_whitespace().skip(1).collect();
    let (code, stdout, stderr) = run(&words);
    assert_eq!(code, 0, "{hint}\n{stdout}\n{stderr}");
    // The voxel size came from the file: k is reported in mD without --voxel-size.
    assert!(stdout.contains("read from"), "{stdout}");
}

#[test]
fn one_seed_gives_one_file_and_another_seed_another() {
    let dir = tempfile::tempdir().unwrap();
    for args in [
        &[
            "sphere-pack",
            "--size",
            "32",
            "--porosity",
            "0.55",
            "--radius",
            "4",
        ][..],
        &[
            "fibres",
            "--size",
            "24",
            "--porosity",
            "0.8",
            "--radius",
            "1.5",
            "--orientation",
            "isotropic",
        ][..],
        &[
            "foam",
            "--size",
            "24",
            "--porosity",
            "0.85",
            "--cell-size",
            "8",
            "--method",
            "inverted-spheres",
        ][..],
    ] {
        let with_seed = |seed: &str, name: &str| {
            let mut a = args.to_vec();
            a.extend_from_slice(&["--seed", seed]);
            let (tif, json, _) = synth(dir.path(), name, &a);
            (std::fs::read(tif).unwrap(), read_json(&json))
        };
        let (a, ja) = with_seed("17", "a.tif");
        let (b, jb) = with_seed("17", "b.tif");
        let (c, _) = with_seed("18", "c.tif");
        assert_eq!(a, b, "{args:?}: same seed, different bytes");
        assert_ne!(a, c, "{args:?}: different seeds, same bytes");
        assert_eq!(ja["output"]["sha256"], jb["output"]["sha256"]);
        assert_eq!(ja["seed"], 17);
    }
}

#[test]
fn raw_output_is_the_mask_bytes_with_a_matching_hint() {
    let dir = tempfile::tempdir().unwrap();
    let (raw, json, stdout) = synth(
        dir.path(),
        "s.raw",
        &[
            "slits",
            "--size",
            "3x5x8",
            "--gap",
            "2",
            "--period",
            "4",
            "--raw",
            "--voxel-size",
            "3um",
        ],
    );
    let bytes = std::fs::read(&raw).unwrap();
    assert_eq!(bytes.len(), 3 * 5 * 8);
    // Layers z = 0..8: per period of 4, walls of 1 layer below and above a 2-layer slit.
    for z in 0..8 {
        let want = if z % 4 == 1 || z % 4 == 2 { 0 } else { 255 };
        assert!(
            bytes[z * 15..(z + 1) * 15].iter().all(|&b| b == want),
            "z {z}"
        );
    }
    let hint = read_json(&json)["estimate_command"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(
        hint.contains("--raw-shape 3x5x8 --raw-type u8 --voxel-size 3um --axis x"),
        "{hint}"
    );
    assert!(stdout.contains("not stored in a raw file"), "{stdout}");
    let words: Vec<&str> = hint.split_whitespace().skip(1).collect();
    let (code, out, err) = run(&words);
    assert_eq!(code, 0, "{out}\n{err}");
}

#[test]
fn bad_options_fail_with_one_line_and_leave_no_file() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("x.tif");
    let o = out.to_str().unwrap();
    let cases: &[(&[&str], &str)] = &[
        (
            &[
                "sphere-pack",
                "--size",
                "32",
                "--porosity",
                "1.5",
                "--radius",
                "4",
            ],
            "porosity",
        ),
        (
            &[
                "sphere-pack",
                "--size",
                "32x32",
                "--porosity",
                "0.6",
                "--radius",
                "4",
            ],
            "--size",
        ),
        (
            &[
                "sphere-pack",
                "--size",
                "32",
                "--porosity",
                "0.6",
                "--radius",
                "4",
                "--radius-dist",
                "uniform",
            ],
            "--radius-spread",
        ),
        (
            &[
                "sphere-pack",
                "--size",
                "32",
                "--porosity",
                "0.6",
                "--radius",
                "4",
                "--radius-spread",
                "0.2",
                "--radius-dist",
                "gamma",
            ],
            "--radius-dist",
        ),
        (
            &[
                "sphere-pack",
                "--size",
                "32",
                "--porosity",
                "0.2",
                "--radius",
                "4",
            ],
            "porosity",
        ),
        (
            &[
                "sphere-pack",
                "--size",
                "32",
                "--porosity",
                "0.6",
                "--radius",
                "4",
                "--method",
                "drop",
            ],
            "--method",
        ),
        (
            &[
                "sphere-array",
                "--lattice",
                "hcp",
                "--solid-fraction",
                "0.2",
                "--cell",
                "16",
            ],
            "--lattice",
        ),
        (
            &["sphere-array", "--solid-fraction", "0.7", "--cell", "16"],
            "--solid-fraction",
        ),
        (
            &[
                "cylinder-array",
                "--packing",
                "triangular",
                "--solid-fraction",
                "0.2",
                "--cell",
                "16",
            ],
            "--packing",
        ),
        (
            &[
                "cylinder-array",
                "--solid-fraction",
                "0.2",
                "--cell",
                "16",
                "--cells",
                "2x2x2",
            ],
            "--cells",
        ),
        (
            &[
                "overlapping-spheres",
                "--size",
                "32",
                "--porosity",
                "0.5",
                "--radius",
                "3",
                "--stretch-axis",
                "w",
                "--aspect",
                "2",
            ],
            "--stretch-axis",
        ),
        (
            &[
                "fibres",
                "--size",
                "32",
                "--porosity",
                "0.8",
                "--radius",
                "2",
                "--axis",
                "x",
            ],
            "--axis",
        ),
        (
            &[
                "fibres",
                "--size",
                "32",
                "--porosity",
                "0.8",
                "--radius",
                "2",
                "--orientation",
                "aligned",
                "--length",
                "9",
            ],
            "--length",
        ),
        (
            &[
                "foam",
                "--size",
                "32",
                "--porosity",
                "0.9",
                "--cell-size",
                "10",
                "--method",
                "honeycomb",
            ],
            "--method",
        ),
        (
            &["slits", "--size", "8", "--gap", "3", "--period", "3"],
            "gap",
        ),
        (&["duct", "--side", "4", "--axis", "q"], "--axis"),
        (
            &["tube", "--radius", "4", "--voxel-size", "5"],
            "--voxel-size",
        ),
        (
            &["tube", "--radius", "4", "--voxel-size", "5 parsecs"],
            "--voxel-size",
        ),
    ];
    for (args, needle) in cases {
        let mut all: Vec<&str> = vec!["synth"];
        all.extend_from_slice(args);
        all.extend_from_slice(&["--out", o]);
        let (code, stdout, stderr) = run(&all);
        assert_eq!(code, 2, "{all:?}\nstdout: {stdout}\nstderr: {stderr}");
        let lines: Vec<&str> = stderr.lines().filter(|l| !l.trim().is_empty()).collect();
        assert_eq!(lines.len(), 1, "{all:?}: {stderr}");
        assert!(
            lines[0].contains(needle),
            "{all:?}: '{}' lacks '{needle}'",
            lines[0]
        );
        assert!(!out.exists(), "{all:?} left {o}");
    }
    // The same file for both outputs is refused before anything is written.
    let (code, _, stderr) = run(&["synth", "tube", "--radius", "3", "--out", o, "--json", o]);
    assert_eq!(code, 2, "{stderr}");
    assert!(!out.exists());
    // A missing output folder is an output problem (exit 3), found before generating.
    let missing = dir.path().join("no/such/dir/x.tif");
    let (code, _, stderr) = run(&[
        "synth",
        "tube",
        "--radius",
        "3",
        "--out",
        missing.to_str().unwrap(),
    ]);
    assert_eq!(code, 3, "{stderr}");
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
}

/// `voxperm synth foam` of a 16³ box, with `extra` options.
fn small_foam(extra: &[&str]) -> (i32, String, String) {
    let mut a = vec![
        "synth",
        "foam",
        "--size",
        "16",
        "--porosity",
        "0.9",
        "--cell-size",
        "8",
    ];
    a.extend_from_slice(extra);
    run(&a)
}

/// An output name whose extension says another format is refused before anything is built
/// (a TIFF named .txt would be skipped by `batch`, a JSON named .tif taken for a stack), for
/// synth, report, estimate and describe.
#[test]
fn output_names_must_match_what_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let txt = dir.path().join("foam.txt");
    let (code, _, stderr) = small_foam(&["--out", txt.to_str().unwrap()]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("this writes a TIFF, not .txt"), "{stderr}");
    assert!(!txt.exists());
    let md = dir.path().join("report.md");
    let (code, _, stderr) = run(&[
        "report",
        dir.path().to_str().unwrap(),
        "--out",
        md.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("this writes HTML, not .md"), "{stderr}");
    assert!(!md.exists());
    // A JSON file named like a stack would be taken for a sample by a folder batch.
    let good = dir.path().join("foam.tif");
    let stack = dir.path().join("geometry.tif");
    let (code, _, stderr) = small_foam(&[
        "--out",
        good.to_str().unwrap(),
        "--json",
        stack.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("this writes JSON, not .tif"), "{stderr}");
    assert!(!good.exists() && !stack.exists());
    for cmd in ["estimate", "describe"] {
        let (code, _, stderr) = run(&[cmd, "x.tif", "--json", stack.to_str().unwrap()]);
        assert_eq!(code, 2, "{cmd}: {stderr}");
        assert!(stderr.contains("this writes JSON, not .tif"), "{stderr}");
    }
}

/// synth writes only regular files (a TIFF is written with seeks and re-read for its hash),
/// and refuses --json and --out naming one file however it is reached.
#[cfg(unix)]
#[test]
fn synth_needs_two_distinct_regular_files() {
    let dir = tempfile::tempdir().unwrap();
    let with = small_foam;
    let (code, _, stderr) = with(&["--out", "-"]);
    assert_eq!(code, 2, "{stderr}");
    let (code, _, stderr) = with(&["--out", "/dev/null"]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("needs a regular file"), "{stderr}");
    // A .json link to the TIFF (the name rule keeps --json from being spelled as a .tif).
    let out = dir.path().join("g.tif");
    std::fs::write(&out, b"earlier").unwrap();
    let alias = dir.path().join("g.json");
    std::os::unix::fs::symlink(&out, &alias).unwrap();
    let (code, _, stderr) = with(&[
        "--out",
        out.to_str().unwrap(),
        "--json",
        alias.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("name the same file"), "{stderr}");
    assert_eq!(std::fs::read(&out).unwrap(), b"earlier");
}
