//! `porewise demo`: build the invented demo campaign from `demo-db/` and show it.

use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::Args;

use crate::error::Outcome;

/// Arguments of `porewise demo`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  porewise demo            build demo-db/demo.sqlite if needed, then show it\n  porewise demo --no-ui    only build it"
)]
pub struct DemoArgs {
    /// Only build the demo campaign file; do not show it.
    #[arg(long)]
    pub no_ui: bool,
    /// Folder holding the demo source files (default: ./demo-db, else the one beside the sources).
    #[arg(long, value_name = "DIR")]
    pub dir: Option<PathBuf>,
    /// Rewrite the demo source CSV files from the seeded generator, then build.
    #[arg(long, hide = true)]
    pub write_sources: bool,
}

/// Where the demo sources live: `--dir`, else `./demo-db`, else the crate's own `demo-db/`.
fn demo_dir(args: &DemoArgs) -> PathBuf {
    if let Some(dir) = &args.dir {
        return dir.clone();
    }
    let local = PathBuf::from("demo-db");
    if local.is_dir() {
        return local;
    }
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db")
}

/// Write the generated source files into `dir`.
fn write_sources(dir: &Path) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    for file in crate::demo::generate() {
        let path = dir.join(file.name);
        std::fs::write(&path, file.text)
            .with_context(|| format!("cannot write {}", path.display()))?;
    }
    Ok(())
}

/// Run `porewise demo`.
///
/// # Errors
/// A demo folder that cannot be read or written.
pub fn run(args: &DemoArgs) -> anyhow::Result<Outcome> {
    let dir = demo_dir(args);
    if args.write_sources {
        write_sources(&dir)?;
        eprintln!("wrote the demo source files into {}", dir.display());
    }
    anyhow::bail!("building the demo campaign is not built yet")
}
