//! `inspect`: decide a batch of recordings against a specification, in
//! parallel, with a record of every decision; and `inspect --watch`, the
//! station mode that decides each recording as it lands in a folder.
//!
//! Each recording is read, fitted with the specification's panel and
//! decided by its rule ([`crate::acceptance::decision`]). A file that cannot be read or
//! fitted becomes a row with its error; the batch goes on.
//!
//! # Outputs and crash safety
//!
//! - Every decision goes into the SQLite history as soon as it is made
//!   (each row its own transaction, so a crash keeps every completed row).
//! - `inspect.csv` and `inspect.jsonl` grow in private spool files
//!   ([`report::batch::Spool`]) and are published atomically (copy,
//!   rename) after every [`FLUSH_EVERY`] recordings but at most once per
//!   [`FLUSH_INTERVAL`], and at the end; in watch mode after every
//!   recording. They are never half written, and memory does not grow
//!   with the batch.
//! - The batch report (`batch-report.md`, `batch-report.html` and its
//!   pictures, [`report::batch`]) is written at the end.
//!
//! # Parallelism
//!
//! Recordings are decided in chunks of [`FLUSH_EVERY`] on the rayon pool by
//! a compute thread, one chunk ahead of the calling thread, which writes
//! the history rows and outputs in batch order. Each rayon thread keeps its
//! own FFT planner.
//!
//! # Watch mode
//!
//! The folder is listed every poll interval. Files already there when the
//! watch starts are left alone. A new file counts as landed when its name
//! ends in `.wav`, `.flac`, `.aif`, `.aiff` or `.aifc` (any case) and its size (non-zero) and modification time
//! are the same in two consecutive polls. Writers should write under
//! another name (`NAME.wav.part`, `NAME.tmp`) and rename to `NAME.wav`
//! when done, which is atomic on one file system; the stability test
//! covers copies that do not.
//!
//! # Stopping: SIGINT and SIGTERM
//!
//! With [`stop_on_signals`] installed (the binary does so for `inspect`),
//! the first SIGINT (Ctrl-C) or SIGTERM asks the batch to stop: no new
//! recording is started, the recordings in flight are decided and
//! recorded, the CSV and JSON Lines files are published, and the batch
//! report of everything decided is written, saying that the run was
//! interrupted and how many recordings of how many were decided. The exit
//! status is then 128 + the signal number (130 for SIGINT, 143 for
//! SIGTERM), whatever the decisions, so that a script never takes a cut
//! batch for a whole one; the decisions themselves are in the outputs. A
//! batch whose every recording was decided before the signal came exits
//! as usual. A second signal ends the process at once (status 128 + the
//! signal): the history keeps every row already committed, and the CSV,
//! JSON Lines and report are as last published.
//!
//! CSV columns: `file,sha256,time,tension_n_per_m,tension_u_n_per_m,
//! expanded_u_n_per_m,wave_speed_m_per_s,wave_speed_u_m_per_s,modes_used,
//! rms_residual_cents,grade,decision,rule,margin_n_per_m,reasons,error,
//! anisotropy_percent,anisotropy_u_percent,unevenness_percent,
//! unevenness_u_percent,calibration_sha256` — the anisotropy (biaxial
//! model, 100·(Tx − Ty)/((Tx + Ty)/2)) and the unevenness (the spread
//! 2|ε| from resolved split pairs, circle or square panel) with their
//! standard uncertainties in percent, empty when not measured; the
//! SHA-256 of the specification's calibration file, empty without one.

mod decide;
mod inputs;
mod record;
mod run;
mod signals;
mod writer;

pub use decide::{decision_is_settled, InspectOptions, StageTiming, NEAR_LIMIT_FIT_U};
pub use inputs::{expand_inputs, RECORDING_EXTENSIONS};
pub use record::station_line;
pub use run::{inspect, inspect_timed, watch};
pub use signals::{stop_on_signals, stop_requested};
pub use writer::{FLUSH_EVERY, FLUSH_INTERVAL};
