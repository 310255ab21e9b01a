//! Atomic output: every file is written to a temporary sibling and renamed
//! into place, so an interrupted run never leaves a half-written output.

use crate::base::error::{Result, TonusError};
use std::path::{Path, PathBuf};

/// Temporary sibling path used for atomic writes: `NAME.part-PID-N`, unique
/// per process and call, so two processes writing the same output never
/// rename each other's half-written file.
pub fn temp_path(p: &Path) -> PathBuf {
    use std::sync::atomic::{AtomicU64, Ordering};
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let mut s = p.as_os_str().to_owned();
    s.push(format!(
        ".part-{}-{}",
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    PathBuf::from(s)
}

/// Writes `bytes` to `path` atomically (temporary sibling, then rename).
///
/// # Errors
/// When the directory is not writable or the disk is full; the temporary
/// file is removed.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let tmp = temp_path(path);
    let err = |e: std::io::Error| TonusError::Write {
        path: path.to_path_buf(),
        reason: e.to_string(),
    };
    if let Err(e) = std::fs::write(&tmp, bytes) {
        let _ = std::fs::remove_file(&tmp);
        return Err(err(e));
    }
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        err(e)
    })
}
