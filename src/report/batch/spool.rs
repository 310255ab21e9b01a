//! The growing CSV / JSON Lines outputs of a batch, published atomically.

use std::io::Write as _;
use std::path::{Path, PathBuf};

use crate::base::error::{Result, TonusError};

/// An output file that grows row by row and is published atomically.
///
/// Rows go to a private spool file beside the output
/// (`NAME.part-PID-spool`), so memory does not grow with the batch.
/// [`Spool::publish`] copies the spool to a temporary sibling and renames
/// it over `NAME`, so `NAME` is always absent or complete as of some
/// publish; [`Spool::finish`] publishes for the last time and removes the
/// spool.
#[derive(Debug)]
pub struct Spool {
    path: PathBuf,
    spool_path: PathBuf,
    file: std::io::BufWriter<std::fs::File>,
}

impl Spool {
    /// Starts a spool for `path` holding `header` (may be empty).
    ///
    /// # Errors
    /// [`TonusError::Write`] when the folder is not writable.
    pub fn create(path: &Path, header: &[u8]) -> Result<Spool> {
        let mut s = path.as_os_str().to_owned();
        s.push(format!(".part-{}-spool", std::process::id()));
        let spool_path = PathBuf::from(s);
        let file = std::fs::File::create(&spool_path).map_err(|e| TonusError::Write {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
        let mut spool = Spool {
            path: path.to_path_buf(),
            spool_path,
            file: std::io::BufWriter::new(file),
        };
        spool.append(header)?;
        Ok(spool)
    }

    fn err(&self, e: impl std::fmt::Display) -> TonusError {
        TonusError::Write {
            path: self.path.clone(),
            reason: e.to_string(),
        }
    }

    /// Appends bytes (one or more whole rows).
    ///
    /// # Errors
    /// [`TonusError::Write`] when the disk is full.
    pub fn append(&mut self, bytes: &[u8]) -> Result<()> {
        self.file.write_all(bytes).map_err(|e| self.err(e))
    }

    /// Makes `NAME` hold every row appended so far (copy, then rename).
    ///
    /// # Errors
    /// [`TonusError::Write`] when the copy or the rename fails; `NAME`
    /// is then left as it was.
    pub fn publish(&mut self) -> Result<()> {
        self.file.flush().map_err(|e| self.err(e))?;
        let tmp = crate::base::files::temp_path(&self.path);
        let done =
            std::fs::copy(&self.spool_path, &tmp).and_then(|_| std::fs::rename(&tmp, &self.path));
        if let Err(e) = done {
            let _ = std::fs::remove_file(&tmp);
            return Err(self.err(e));
        }
        Ok(())
    }

    /// Publishes the last time and removes the spool.
    ///
    /// # Errors
    /// As [`Spool::publish`].
    pub fn finish(mut self) -> Result<()> {
        self.file.flush().map_err(|e| self.err(e))?;
        std::fs::rename(&self.spool_path, &self.path).map_err(|e| self.err(e))
    }
}

impl Drop for Spool {
    fn drop(&mut self) {
        // After `finish` the spool has been renamed away and this does
        // nothing; after an error it removes the private file.
        let _ = std::fs::remove_file(&self.spool_path);
    }
}
