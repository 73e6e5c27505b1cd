//! Atomic file output: write to a temporary file beside the target, then rename, so an
//! interrupted run never leaves a half-written file under the final name.

use std::fs;
use std::io::{BufWriter, Write};
use std::path::Path;

use super::IoError;

/// Writes `path` by calling `fill` on a buffered temporary file in the same directory and
/// renaming it into place only when `fill` and the flush succeed.
pub fn write_atomic<F>(path: &Path, fill: F) -> Result<(), IoError>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let dir = match path.parent() {
        Some(parent) if !parent.as_os_str().is_empty() => parent.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    fs::create_dir_all(&dir).map_err(|e| IoError::file(&dir, e))?;
    let file_name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".to_string());
    let tmp = dir.join(format!(".{file_name}.{}.tmp", std::process::id()));
    let result = (|| {
        let file = fs::File::create(&tmp)?;
        let mut writer = BufWriter::new(file);
        fill(&mut writer)?;
        writer.flush()?;
        writer.get_ref().sync_all()?;
        Ok(())
    })();
    match result {
        Ok(()) => fs::rename(&tmp, path).map_err(|e| IoError::file(path, e)),
        Err(e) => {
            let _ = fs::remove_file(&tmp);
            Err(IoError::file(path, e))
        }
    }
}

/// Writes a whole byte buffer atomically.
pub fn write_bytes_atomic(path: &Path, bytes: &[u8]) -> Result<(), IoError> {
    write_atomic(path, |w| w.write_all(bytes))
}
