//! `voxperm bench` as a library call and as a command: the traffic model's figures, a tiny run
//! that must produce every case with self-consistent numbers, and the option checks. Speed is
//! never asserted (the machine is shared); only that the figures are finite and consistent.
use assert_cmd::Command;
use voxperm::lbm::bench::{BenchConfig, BenchStructure, attainable_mlups, run, traffic};

/// The model adds 152 B of populations, 3 B of coordinates and 2/φ B of node map per update
/// (derivation in README.md, Performance; the 152 B after Wittmann et al. 2013).
#[test]
fn traffic_model_adds_up() {
    let t = traffic(400, 1000);
    assert_eq!(t.populations, 152.0);
    assert_eq!(t.coordinates, 3.0);
    assert!((t.node_map - 5.0).abs() < 1e-12, "2/φ with φ = 0.4");
    assert_eq!(t.total, t.populations + t.coordinates + t.node_map);
    assert_eq!(t.total_upper, 152.0 + 3.0 + 36.0);
    assert!(t.total < t.total_upper);
    // All fluid: the map costs as much per node as per voxel.
    assert_eq!(traffic(10, 10).node_map, 2.0);
    // 16 GB/s over 160 B per update is 100 million updates per second.
    assert!((attainable_mlups(16.0, 160.0) - 100.0).abs() < 1e-9);
}

/// A tiny run measures every structure at every thread count, and each case's derived figures
/// follow from its measured ones.
#[test]
fn tiny_bench_runs_every_case() {
    let cfg = BenchConfig {
        sizes: vec![32],
        bandwidth_array_bytes: 1 << 20,
        reps: 1,
        min_seconds: 0.0,
        ..BenchConfig::full(2)
    };
    let mut lines = Vec::new();
    let r = run(&cfg, &mut |m| lines.push(m.to_string())).expect("bench");
    assert_eq!(r.bandwidth.len(), 2);
    assert_eq!(r.cases.len(), 2 * 2);
    assert!(!lines.is_empty());
    for b in &r.bandwidth {
        for v in [b.copy_gb_s, b.triad_gb_s, b.update_gb_s] {
            assert!(v.is_finite() && v > 0.0, "{b:?}");
        }
    }
    for s in [BenchStructure::SpherePack, BenchStructure::Foam] {
        let threads: Vec<usize> = r
            .cases
            .iter()
            .filter(|c| c.structure == s)
            .map(|c| c.threads)
            .collect();
        assert_eq!(threads, vec![1, 2], "{s:?}");
    }
    for c in &r.cases {
        assert!(c.mlups.is_finite() && c.mlups > 0.0, "{c:?}");
        assert!(c.steps >= 2 && c.steps.is_multiple_of(2));
        let want = traffic(c.fluid_nodes, 32 * 32 * 32);
        assert_eq!(c.traffic, want);
        assert!((c.achieved_gb_s - c.mlups * c.traffic.total / 1e3).abs() < 1e-9 * c.achieved_gb_s);
        assert!((c.attainable_mlups - attainable_mlups(c.copy_gb_s, c.traffic.total)).abs() < 1e-9);
        assert!((c.roofline_fraction - c.mlups / c.attainable_mlups).abs() < 1e-12);
        // Harmonic mean of the even and odd rates over a step pair.
        let pair = 2.0 / (1.0 / c.even_mlups + 1.0 / c.odd_mlups);
        assert!((pair - c.mlups).abs() < 1e-9 * c.mlups);
        assert!(c.porosity > 0.3 && c.porosity < 0.9, "{c:?}");
    }
}

#[test]
fn bench_command_writes_json_and_refuses_bad_options() {
    let dir = tempfile::tempdir().unwrap();
    let json = dir.path().join("bench.json");
    let out = Command::cargo_bin("voxperm")
        .unwrap()
        .args([
            "bench",
            "--sizes",
            "32",
            "--structures",
            "foam",
            "--threads",
            "1",
        ])
        .args(["--reps", "1", "--array-size", "1MiB", "-q", "--json"])
        .arg(&json)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "stdout {stdout}\nstderr {}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("roofline"), "{stdout}");
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(doc["cases"].as_array().unwrap().len(), 1);
    assert!(doc["cases"][0]["traffic"]["total"].as_f64().unwrap() > 152.0);
    assert!(doc["bandwidth"][0]["copy_gb_s"].as_f64().unwrap() > 0.0);

    for bad in [
        &["bench", "--sizes", "8"][..],
        &["bench", "--structures", "sponge"],
        &["bench", "--threads", "0"],
        &["bench", "--reps", "0"],
        &["bench", "--isa", "sse9"],
        &["bench", "--array-size", "lots"],
    ] {
        let out = Command::cargo_bin("voxperm")
            .unwrap()
            .args(bad)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{bad:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(err.trim().lines().count(), 1, "{bad:?}: {err}");
    }
}
