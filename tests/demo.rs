//! The committed demo source files are exactly what the seeded generator writes.

use std::path::Path;

#[test]
fn committed_demo_files_match_the_generator() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        let committed = std::fs::read_to_string(dir.join(file.name))
            .unwrap_or_else(|e| panic!("demo-db/{} is missing: {e}", file.name));
        assert!(
            committed == file.text,
            "demo-db/{} differs from the generator; run `cargo run -- demo --write-sources`",
            file.name
        );
    }
}

/// Copy the committed demo sources into a fresh folder.
fn fresh_demo_dir() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("temp dir");
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), tmp.path().join(file.name)).expect("copy");
    }
    tmp
}

#[test]
fn demo_builds_from_scratch_and_a_second_run_reuses_it() {
    let tmp = fresh_demo_dir();
    let run = || {
        assert_cmd::Command::cargo_bin("porewise")
            .expect("binary")
            .args(["demo", "--no-ui", "--dir"])
            .arg(tmp.path())
            .assert()
            .success()
    };
    let first = run();
    let stderr = String::from_utf8_lossy(&first.get_output().stderr).into_owned();
    assert!(stderr.contains("building"), "{stderr}");
    let file = tmp.path().join("demo.sqlite");
    let campaign = porewise::store::Campaign::open(&file).expect("opens");
    let counts = porewise::store::overview::counts(campaign.connection()).expect("counts");
    assert_eq!((counts.sites, counts.layers, counts.samples), (4, 14, 28));
    // Every generated lab row became a reading.
    let lab_rows: usize = porewise::demo::generate()
        .iter()
        .filter(|f| f.name.starts_with("lab-"))
        .map(|f| f.text.lines().count() - 1)
        .sum();
    assert_eq!(counts.readings, lab_rows as u64);
    drop(campaign);

    let second = run();
    let stderr = String::from_utf8_lossy(&second.get_output().stderr).into_owned();
    assert!(!stderr.contains("building"), "second run rebuilt: {stderr}");
}
