//! Writing result files so that a failed or interrupted write never leaves a half file:
//! the content goes to a temporary file beside the target, which is then renamed over it.

use std::fs;
use std::io::{self, Write};
use std::path::Path;

/// Writes `path` atomically with whatever `fill` writes into the buffer it is given.
pub fn write_atomic<F>(path: &Path, fill: F) -> io::Result<()>
where
    F: FnOnce(&mut dyn Write) -> io::Result<()>,
{
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .ok_or_else(|| io::Error::new(io::ErrorKind::InvalidInput, "not a file path"))?;
    let temp = dir.join(format!(
        ".{}.{}.partial",
        name.to_string_lossy(),
        std::process::id()
    ));
    let result = (|| {
        let file = fs::File::create(&temp)?;
        let mut writer = io::BufWriter::new(file);
        fill(&mut writer)?;
        let file = writer
            .into_inner()
            .map_err(std::io::IntoInnerError::into_error)?;
        file.sync_all()?;
        fs::rename(&temp, path)
    })();
    if result.is_err() {
        let _ = fs::remove_file(&temp);
    }
    result
}
