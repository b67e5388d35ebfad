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
