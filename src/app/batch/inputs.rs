//! Which files a batch or a watch takes: folders expanded into their
//! recordings, and the listing the watch mode polls.

use crate::base::error::{Result, TonusError};
use std::path::{Path, PathBuf};
use std::time::SystemTime;

/// Expands folders into their recordings (sorted): the files named `.wav`,
/// `.flac`, `.aif`, `.aiff` or `.aifc` ([`RECORDING_EXTENSIONS`]); files are kept as
/// given.
///
/// # Errors
/// A path that does not exist, a folder that cannot be listed or holds no
/// recording, and an input list that holds no recording at all.
pub fn expand_inputs(inputs: &[PathBuf]) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for p in inputs {
        if p.is_dir() {
            let mut v: Vec<PathBuf> = std::fs::read_dir(p)
                .map_err(|e| TonusError::Io {
                    path: p.clone(),
                    reason: e.to_string(),
                })?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|x| is_audio_name(x))
                .collect();
            if v.is_empty() {
                return Err(TonusError::Io {
                    path: p.clone(),
                    reason: "a folder with no .wav recording in it (nor .flac, .aif, .aiff or .aifc); give recordings or folders that hold them".into(),
                });
            }
            v.sort();
            out.extend(v);
        } else {
            out.push(p.clone());
        }
    }
    if out.is_empty() {
        return Err(TonusError::Io {
            path: inputs.first().cloned().unwrap_or_default(),
            reason: "no .wav recording there; give recordings or folders that hold them".into(),
        });
    }
    Ok(out)
}

/// File name endings taken as recordings when a folder is scanned or
/// watched (any case). The content decides the format when the file is
/// read ([`recording::read_audio`]).
pub const RECORDING_EXTENSIONS: [&str; 5] = ["wav", "flac", "aif", "aiff", "aifc"];

fn is_audio_name(p: &Path) -> bool {
    p.extension().is_some_and(|e| {
        RECORDING_EXTENSIONS
            .iter()
            .any(|x| e.eq_ignore_ascii_case(x))
    })
}

/// Size and modification time of a file, for the landing test.
pub(super) type Signature = (u64, Option<SystemTime>);

/// The recordings (`.wav`, `.flac`, `.aif`, `.aiff`, `.aifc`) in `dir` with their
/// signatures, sorted by name.
pub(super) fn wav_listing(dir: &Path) -> Result<Vec<(PathBuf, Signature)>> {
    let rd = std::fs::read_dir(dir).map_err(|e| TonusError::Io {
        path: dir.to_path_buf(),
        reason: format!("cannot list the watched folder: {e}"),
    })?;
    let mut v: Vec<(PathBuf, Signature)> = rd
        .filter_map(|e| e.ok())
        .filter(|e| is_audio_name(&e.path()))
        .filter_map(|e| {
            let md = e.metadata().ok()?;
            md.is_file()
                .then(|| (e.path(), (md.len(), md.modified().ok())))
        })
        .collect();
    v.sort();
    Ok(v)
}
