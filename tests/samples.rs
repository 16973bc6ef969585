//! The shipped demo volumes in samples/: each exists, is small, is reproduced byte for byte by
//! the `voxperm synth` command samples/README.md gives for it (and scripts/make_samples.sh
//! runs), has the porosity and voxel size the README states, and the quick-start estimate on
//! samples/bead-pack.tif gives the permeability the README states.

use assert_cmd::Command;
use std::path::{Path, PathBuf};
use voxperm::volume::{ReadLimits, Segmentation, load, segment};

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn readme() -> String {
    std::fs::read_to_string(repo().join("samples/README.md")).expect("samples/README.md")
}

/// Cells of the results-table row of `file` in samples/README.md, trimmed.
fn table_row(readme: &str, file: &str) -> Vec<String> {
    let key = format!("| `{file}`");
    let line = readme
        .lines()
        .find(|l| l.starts_with(&key))
        .unwrap_or_else(|| panic!("samples/README.md has no table row for {file}"));
    line.trim_matches('|')
        .split('|')
        .map(|c| c.trim().to_string())
        .collect()
}

/// Column index of `header` in the results table.
fn column(readme: &str, header: &str) -> usize {
    let line = readme
        .lines()
        .find(|l| l.starts_with("| file |"))
        .expect("results table header '| file |'");
    line.trim_matches('|')
        .split('|')
        .position(|c| c.trim() == header)
        .unwrap_or_else(|| panic!("no column '{header}' in {line}"))
}

/// The `voxperm synth …` commands of the README (one per line in code blocks).
fn synth_commands(readme: &str) -> Vec<String> {
    readme
        .lines()
        .map(str::trim)
        .filter(|l| l.starts_with("voxperm synth "))
        .map(String::from)
        .collect()
}

fn out_path(cmd: &str) -> String {
    let words: Vec<&str> = cmd.split_whitespace().collect();
    let i = words.iter().position(|w| *w == "--out").expect("--out");
    words[i + 1].to_string()
}

#[test]
fn samples_are_reproduced_by_their_documented_commands() {
    let text = readme();
    let commands = synth_commands(&text);
    assert!(
        (3..=5).contains(&commands.len()),
        "expected 3-5 samples, found {commands:?}"
    );
    assert!(
        commands
            .iter()
            .any(|c| out_path(c) == "samples/bead-pack.tif")
    );
    let script = std::fs::read_to_string(repo().join("scripts/make_samples.sh")).unwrap();
    let dir = tempfile::tempdir().unwrap();
    for cmd in &commands {
        // The regeneration script runs the same command.
        let in_script = cmd.replacen("voxperm ", "\"$VOXPERM\" ", 1);
        assert!(
            script.contains(&in_script),
            "scripts/make_samples.sh lacks: {in_script}"
        );
        let shipped = repo().join(out_path(cmd));
        let meta = std::fs::metadata(&shipped)
            .unwrap_or_else(|_| panic!("{} is missing", shipped.display()));
        assert!(meta.len() <= 2 << 20, "{} is over 2 MB", shipped.display());
        let fresh = dir.path().join(shipped.file_name().unwrap());
        let mut args: Vec<String> = cmd.split_whitespace().skip(1).map(String::from).collect();
        let i = args.iter().position(|w| w == "--out").unwrap();
        args[i + 1] = fresh.to_str().unwrap().to_string();
        let out = Command::cargo_bin("voxperm")
            .unwrap()
            .args(&args)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{cmd}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert_eq!(
            std::fs::read(&fresh).unwrap(),
            std::fs::read(&shipped).unwrap(),
            "{cmd} no longer reproduces {}",
            shipped.display()
        );
        check_documented_geometry(&text, &shipped);
    }
}

/// Porosity (4 decimals) and voxel size in the README table match the file.
fn check_documented_geometry(text: &str, path: &Path) {
    let name = path.file_name().unwrap().to_str().unwrap();
    let row = table_row(text, name);
    let vol = load(path, None, &ReadLimits::new(1 << 30)).unwrap();
    let phi = segment(&vol, &Segmentation::default(), None)
        .unwrap()
        .porosity();
    let documented: f64 = row[column(text, "porosity")].parse().unwrap();
    assert!(
        (phi - documented).abs() <= 5e-5,
        "{name}: porosity {phi} vs {documented}"
    );
    let dx = vol
        .voxel_size
        .expect("voxel size recorded in the TIFF")
        .metres;
    let documented = voxperm::volume::parse_length(&row[column(text, "voxel")]).unwrap();
    assert!(
        (dx / documented - 1.0).abs() < 1e-9,
        "{name}: voxel {dx} vs {documented}"
    );
}

#[test]
fn quick_start_estimate_matches_the_documented_value() {
    let text = readme();
    let row = table_row(&text, "bead-pack.tif");
    let documented: f64 = row[column(&text, "k_x (mD)")].parse().unwrap();
    let dir = tempfile::tempdir().unwrap();
    let json = dir.path().join("bead.json");
    let sample = repo().join("samples/bead-pack.tif");
    let out = Command::cargo_bin("voxperm")
        .unwrap()
        .args([
            "estimate",
            sample.to_str().unwrap(),
            "--axis",
            "x",
            "--periodic",
            "--json",
        ])
        .arg(&json)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let k = v["permeability_mD"].as_f64().unwrap();
    // The README gives four significant figures (at most 0.05 % of rounding). The solver is
    // bit-identical across builds and thread counts (tests/determinism.rs and the kernel's
    // tests), so the rest of the 0.5 % only leaves room for solver changes that move the last
    // digits; a README left stale by more than that fails here.
    assert!(
        (k / documented - 1.0).abs() < 5e-3,
        "k = {k} mD, README says {documented}"
    );
    let tortuosity: f64 = row[column(&text, "tortuosity")].parse().unwrap();
    assert!((v["tortuosity"].as_f64().unwrap() - tortuosity).abs() < 5e-3);
    // The voxel size came from the file, not from an option.
    assert!(
        v["input"]["voxel_size_source"]
            .as_str()
            .unwrap()
            .contains("read from"),
        "{}",
        v["input"]
    );
}
