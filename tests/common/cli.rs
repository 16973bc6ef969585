//! Running the real `voxperm` binary from integration tests.

use assert_cmd::Command;
use std::path::{Path, PathBuf};
use voxperm::geometry::PoreMask;
use voxperm::volume::{TiffCompression, Volume, write_tiff_stack};

/// The binary under test.
pub fn voxperm() -> Command {
    Command::cargo_bin("voxperm").expect("binary")
}

/// Runs voxperm in `cwd` and returns (exit code, stdout, stderr).
pub fn run_in(cwd: &Path, args: &[&str]) -> (i32, String, String) {
    collect(voxperm().current_dir(cwd).args(args))
}

/// Runs voxperm and returns (exit code, stdout, stderr).
pub fn run(args: &[&str]) -> (i32, String, String) {
    collect(voxperm().args(args))
}

fn collect(cmd: &mut Command) -> (i32, String, String) {
    let out = cmd.output().expect("run");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into(),
        String::from_utf8_lossy(&out.stderr).into(),
    )
}

/// Writes `mask` as a TIFF stack (pore 0, solid 255) named `name` in `dir`.
pub fn write_mask_with(dir: &Path, name: &str, mask: &PoreMask, c: TiffCompression) -> PathBuf {
    let p = dir.join(name);
    write_tiff_stack(&p, &Volume::from_mask(mask, 0, 255), c, None).expect("write");
    p
}
