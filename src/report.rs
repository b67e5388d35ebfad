//! Tables and exports built from model and store values.

pub mod fit_table;

use std::io::Write;
use std::path::Path;

/// Write `bytes` to `path` atomically: a temporary file beside it, then a rename, so a
/// crash or a full disk never leaves a half-written file under the final name.
///
/// # Errors
/// Any I/O error creating, writing, syncing or renaming the temporary file (it is removed).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    let name = path
        .file_name()
        .map_or_else(|| "output".into(), |n| n.to_string_lossy().into_owned());
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}
