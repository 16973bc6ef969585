//! What the interrupt handler relies on: `remove_pending_temporaries` removes the temporary
//! file of a write in progress, says how many it removed, and leaves the destination as it was.
//!
//! The call locks the list of pending writes for good (the handler exits right after), so the
//! check runs in a child process: this test binary started again with `VOXPERM_INTERRUPT_DIR`
//! and the parent's process id set, which exits from inside the write, as the handler does.

use std::io::Write;
use std::path::Path;
use std::process::Command;

const CHILD_ENV: &str = "VOXPERM_INTERRUPT_DIR";
const PARENT_ENV: &str = "VOXPERM_INTERRUPT_PARENT";
const TEST: &str = "an_interrupt_removes_and_counts_the_unfinished_outputs";

/// The child: starts a write, "interrupts" it halfway and reports what it saw on stdout.
fn child(dir: &Path) -> ! {
    let dest = dir.join("result.json");
    let _ = voxperm::volume::write_atomically(&dest, |w| {
        w.write_all(b"{\"half\": ").unwrap();
        w.flush().unwrap();
        let hidden = std::fs::read_dir(dir).unwrap().count();
        let removed = voxperm::volume::remove_pending_temporaries();
        let left = std::fs::read_dir(dir).unwrap().count();
        println!("HIDDEN {hidden} REMOVED {removed} LEFT {left}");
        std::process::exit(0);
    });
    unreachable!("the write returned after the interrupt");
}

#[test]
fn an_interrupt_removes_and_counts_the_unfinished_outputs() {
    // The child is the process this test started: its parent's id travels with the folder, so
    // a variable left in the environment cannot turn the test itself into a child.
    if let (Some(dir), Some(parent)) = (std::env::var_os(CHILD_ENV), std::env::var_os(PARENT_ENV))
        && parent.to_str() == Some(&std::os::unix::process::parent_id().to_string())
    {
        child(Path::new(&dir));
    }
    let dir = tempfile::tempdir().unwrap();
    // An earlier file of the same name must survive the interrupted rewrite.
    std::fs::write(dir.path().join("result.json"), "earlier").unwrap();
    let out = Command::new(std::env::current_exe().unwrap())
        .args(["--exact", TEST, "--nocapture", "--test-threads", "1"])
        .env(CHILD_ENV, dir.path())
        .env(PARENT_ENV, std::process::id().to_string())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{stdout}");
    // During the write: the destination and one temporary file. After the removal: one
    // removed, only the destination left, unchanged.
    assert!(stdout.contains("HIDDEN 2 REMOVED 1 LEFT 1"), "{stdout}");
    assert_eq!(
        std::fs::read_to_string(dir.path().join("result.json")).unwrap(),
        "earlier"
    );
}
