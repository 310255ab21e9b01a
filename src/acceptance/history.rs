//! The decision history: every acceptance decision, one row each, in an
//! embedded SQLite database (rusqlite, SQLite bundled).
//!
//! # Durability and concurrency
//!
//! - The database runs in write-ahead-log mode (`PRAGMA journal_mode=WAL`)
//!   with `PRAGMA synchronous=FULL`, so a row is on disk when
//!   [`History::insert`] returns, and readers never block the writer.
//! - Each insert is its own `BEGIN IMMEDIATE` transaction: the write lock
//!   is taken at the start, and a writer that finds it held waits through
//!   SQLite's busy handler for up to [`BUSY_TIMEOUT`] instead of failing.
//!   Several processes or threads, each with its own [`History`], can
//!   therefore insert at once without losing rows.
//! - WAL needs shared memory between the processes: keep the database on a
//!   local disk, not a network share (SQLite documentation, "Write-Ahead
//!   Logging", §"Disadvantages").
//!
//! # Table `decisions` (schema version 2, `PRAGMA user_version`)
//!
//! | column | content |
//! |---|---|
//! | `id` | row number, ascending in insertion order |
//! | `recording_sha256` | SHA-256 of the recording's bytes, hex |
//! | `recording_path` | the path as given |
//! | `time_utc` | decision time, RFC 3339 UTC with milliseconds, e.g. `2025-03-01T08:15:02.120Z` |
//! | `time_unix_ms` | the same as milliseconds since 1970-01-01T00:00:00Z (used by filters) |
//! | `station`, `operator` | optional text |
//! | `spec_name`, `spec_version`, `spec_sha256` | the specification (its file's SHA-256) |
//! | `tension_n_per_m`, `tension_u_n_per_m` | tension and the standard uncertainty used for the decision (fit and areal density combined), N/m; NULL if none |
//! | `wave_speed_m_per_s`, `wave_speed_u_m_per_s` | wave speed and its standard uncertainty, m/s |
//! | `modes_used` | modes in the fit |
//! | `rms_residual_cents` | rms residual of the fit, cents |
//! | `grade` | sound, fair, doubtful, unfit |
//! | `decision` | pass, fail, indeterminate, not_measured |
//! | `rule` | simple, guarded |
//! | `reasons` | JSON array of sentences (grade and decision reasons) |
//! | `record_json` | the full JSON record of the measurement |
//! | `anisotropy_percent`, `anisotropy_u_percent` | biaxial model: 100·(Tx − Ty)/((Tx + Ty)/2) and its standard uncertainty, %; NULL otherwise (version 2) |
//! | `unevenness_percent`, `unevenness_u_percent` | circle or square panel with a resolved split pair: the spread 2\|ε\| and its standard uncertainty, %; NULL otherwise (version 2) |
//! | `calibration_sha256` | SHA-256 of the specification's calibration file, hex; NULL without one (version 2) |
//!
//! [`History::export_csv`] writes the same columns except `record_json`
//! and `time_unix_ms`, with `reasons` joined by `"; "`; the version 2
//! columns come last.
//!
//! # Older files
//!
//! A database of schema version 1 (no anisotropy, unevenness or
//! calibration columns) is brought to version 2 when opened: each missing
//! column is added with `ALTER TABLE … ADD COLUMN` (NULL in the old rows),
//! in the same transaction that reads the version. A file of a newer
//! version than this tonus knows is refused.

use crate::acceptance::decision::Verdict;
use crate::acceptance::spec::Spec;
use crate::base::error::{Result, TonusError};
use crate::base::time::UtcTime;
use crate::fitting::measurement::Measurement;
use rusqlite::{params, params_from_iter, Connection, OptionalExtension, TransactionBehavior};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// How long a writer waits for another's transaction before giving up.
pub const BUSY_TIMEOUT: Duration = Duration::from_secs(10);

/// Schema version kept in `PRAGMA user_version`.
pub const SCHEMA_VERSION: i64 = 2;

/// Columns added in schema version 2, with their SQL types (all nullable).
const V2_COLUMNS: [(&str, &str); 5] = [
    ("anisotropy_percent", "REAL"),
    ("anisotropy_u_percent", "REAL"),
    ("unevenness_percent", "REAL"),
    ("unevenness_u_percent", "REAL"),
    ("calibration_sha256", "TEXT"),
];

const SCHEMA: &str = "
CREATE TABLE IF NOT EXISTS decisions (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    recording_sha256 TEXT NOT NULL,
    recording_path TEXT NOT NULL,
    time_utc TEXT NOT NULL,
    time_unix_ms INTEGER NOT NULL,
    station TEXT,
    operator TEXT,
    spec_name TEXT NOT NULL,
    spec_version TEXT NOT NULL,
    spec_sha256 TEXT NOT NULL,
    tension_n_per_m REAL,
    tension_u_n_per_m REAL,
    wave_speed_m_per_s REAL,
    wave_speed_u_m_per_s REAL,
    modes_used INTEGER,
    rms_residual_cents REAL,
    grade TEXT NOT NULL,
    decision TEXT NOT NULL,
    rule TEXT NOT NULL,
    reasons TEXT NOT NULL,
    record_json TEXT NOT NULL,
    anisotropy_percent REAL,
    anisotropy_u_percent REAL,
    unevenness_percent REAL,
    unevenness_u_percent REAL,
    calibration_sha256 TEXT
);
CREATE INDEX IF NOT EXISTS decisions_spec_time ON decisions (spec_name, time_unix_ms);
CREATE INDEX IF NOT EXISTS decisions_time ON decisions (time_unix_ms);
CREATE INDEX IF NOT EXISTS decisions_recording ON decisions (recording_sha256);
";

const COLUMNS: &str = "id, recording_sha256, recording_path, time_unix_ms, station, operator, \
    spec_name, spec_version, spec_sha256, tension_n_per_m, tension_u_n_per_m, \
    wave_speed_m_per_s, wave_speed_u_m_per_s, modes_used, rms_residual_cents, grade, \
    decision, rule, reasons, record_json, anisotropy_percent, anisotropy_u_percent, \
    unevenness_percent, unevenness_u_percent, calibration_sha256";

/// Column names of [`History::export_csv`], in order.
pub const CSV_HEADER: [&str; 24] = [
    "id",
    "time_utc",
    "recording_sha256",
    "recording_path",
    "station",
    "operator",
    "spec_name",
    "spec_version",
    "spec_sha256",
    "tension_n_per_m",
    "tension_u_n_per_m",
    "wave_speed_m_per_s",
    "wave_speed_u_m_per_s",
    "modes_used",
    "rms_residual_cents",
    "grade",
    "decision",
    "rule",
    "reasons",
    "anisotropy_percent",
    "anisotropy_u_percent",
    "unevenness_percent",
    "unevenness_u_percent",
    "calibration_sha256",
];

/// One decision as stored.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// SHA-256 of the recording's bytes, hex.
    pub recording_sha256: String,
    /// Path of the recording as given.
    pub recording_path: String,
    /// When the decision was made.
    pub time: UtcTime,
    /// Measuring station, if known.
    pub station: Option<String>,
    /// Operator, if known.
    pub operator: Option<String>,
    /// Specification name.
    pub spec_name: String,
    /// Specification version.
    pub spec_version: String,
    /// SHA-256 of the specification file, hex.
    pub spec_sha256: String,
    /// Tension, N/m.
    pub tension_n_per_m: Option<f64>,
    /// Standard uncertainty of the tension used for the decision, N/m.
    pub tension_u_n_per_m: Option<f64>,
    /// Wave speed, m/s.
    pub wave_speed_m_per_s: Option<f64>,
    /// Standard uncertainty of the wave speed, m/s.
    pub wave_speed_u_m_per_s: Option<f64>,
    /// Modes in the fit.
    pub modes_used: Option<u32>,
    /// RMS residual of the fit, cents.
    pub rms_residual_cents: Option<f64>,
    /// Grade name.
    pub grade: String,
    /// Decision name ([`crate::acceptance::decision::Decision::name`]).
    pub decision: String,
    /// Rule name.
    pub rule: String,
    /// Reasons: the grade's, then the decision's.
    pub reasons: Vec<String>,
    /// The full JSON record.
    pub record_json: String,
    /// Anisotropy (biaxial model), %.
    pub anisotropy_percent: Option<f64>,
    /// Its standard uncertainty, %.
    pub anisotropy_u_percent: Option<f64>,
    /// Unevenness, the spread 2|ε| from resolved split pairs, %.
    pub unevenness_percent: Option<f64>,
    /// Its standard uncertainty, %.
    pub unevenness_u_percent: Option<f64>,
    /// SHA-256 of the calibration file the fit used, hex.
    pub calibration_sha256: Option<String>,
}

/// Where a recording came from and who measured it.
#[derive(Debug, Clone, Default)]
pub struct RecordingContext {
    /// SHA-256 of the recording's bytes ([`crate::base::hash::sha256_hex`]).
    pub recording_sha256: String,
    /// Path as given.
    pub recording_path: String,
    /// Station, if known.
    pub station: Option<String>,
    /// Operator, if known.
    pub operator: Option<String>,
}

impl Row {
    /// The row for a decision made now on a measurement under a spec.
    /// `record_json` is the measurement's full JSON record (from
    /// `report`), stored as given.
    pub fn from_decision(
        ctx: &RecordingContext,
        spec: &Spec,
        m: &Measurement,
        verdict: &Verdict,
        record_json: String,
    ) -> Row {
        let input = spec.decision_input(m);
        let mut reasons = m.quality.reasons.clone();
        if let crate::acceptance::decision::Decision::NotMeasured { reason } = &verdict.decision {
            reasons.push(reason.clone());
        }
        reasons.extend(verdict.reasons.iter().cloned());
        Row {
            recording_sha256: ctx.recording_sha256.clone(),
            recording_path: ctx.recording_path.clone(),
            time: UtcTime::now(),
            station: ctx.station.clone(),
            operator: ctx.operator.clone(),
            spec_name: spec.name.clone(),
            spec_version: spec.version.clone(),
            spec_sha256: spec.hash.clone(),
            tension_n_per_m: input.tension.map(|t| t.value),
            tension_u_n_per_m: input.tension.map(|t| t.standard_uncertainty),
            wave_speed_m_per_s: m.fit.as_ref().map(|f| f.wave_speed.value),
            wave_speed_u_m_per_s: m.fit.as_ref().map(|f| f.wave_speed.standard_uncertainty),
            modes_used: m
                .fit
                .as_ref()
                .map(|f| u32::try_from(f.n_used).unwrap_or(u32::MAX)),
            rms_residual_cents: m.fit.as_ref().map(|f| f.rms_residual_cents),
            grade: m.quality.grade.name().to_string(),
            decision: verdict.decision.name().to_string(),
            rule: verdict.rule.to_string(),
            reasons,
            record_json,
            anisotropy_percent: input.anisotropy_percent.map(|a| a.value),
            anisotropy_u_percent: input.anisotropy_percent.map(|a| a.standard_uncertainty),
            unevenness_percent: input.unevenness_percent.map(|e| e.value),
            unevenness_u_percent: input.unevenness_percent.map(|e| e.standard_uncertainty),
            calibration_sha256: spec.calibration_sha256.clone(),
        }
    }
}

/// A stored row with its id.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredRow {
    /// Row id, ascending in insertion order.
    pub id: i64,
    /// The row.
    pub row: Row,
}

/// Which rows to return; unset fields match everything.
#[derive(Debug, Clone, Default)]
pub struct Filter {
    /// Exact specification name (the panel type).
    pub spec_name: Option<String>,
    /// Decisions at or after this time.
    pub since: Option<UtcTime>,
    /// Decisions before this time.
    pub until: Option<UtcTime>,
    /// Decision name: pass, fail, indeterminate, not_measured.
    pub decision: Option<String>,
}

/// An open decision history.
pub struct History {
    conn: Connection,
    path: PathBuf,
}

impl std::fmt::Debug for History {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("History").field("path", &self.path).finish()
    }
}

impl History {
    /// Opens (creating if needed) the database at `path`: busy timeout,
    /// WAL, full synchronisation, schema.
    ///
    /// # Errors
    /// [`TonusError::Io`] when the file cannot be opened or is not a tonus
    /// history (or one of a newer schema).
    pub fn open(path: &Path) -> Result<History> {
        let io = |e: rusqlite::Error| TonusError::Io {
            path: path.to_path_buf(),
            reason: format!("decision history: {e}"),
        };
        let mut conn = Connection::open(path).map_err(io)?;
        // The busy timeout first: the pragmas and the schema below may
        // have to wait for another process opening the same file.
        conn.busy_timeout(BUSY_TIMEOUT).map_err(io)?;
        // Switching to WAL needs a moment alone with the file, and SQLite
        // does not always run the busy handler for it: retry, bounded by
        // the busy timeout, when a second process is opening at once.
        let started = std::time::Instant::now();
        let mode: String = loop {
            match conn.query_row("PRAGMA journal_mode=WAL", [], |r| r.get::<_, String>(0)) {
                Ok(m) => break m,
                Err(rusqlite::Error::SqliteFailure(e, _))
                    if matches!(
                        e.code,
                        rusqlite::ErrorCode::DatabaseBusy | rusqlite::ErrorCode::DatabaseLocked
                    ) && started.elapsed() < BUSY_TIMEOUT =>
                {
                    std::thread::sleep(std::time::Duration::from_millis(20));
                }
                Err(e) => return Err(io(e)),
            }
        };
        if !mode.eq_ignore_ascii_case("wal") {
            return Err(TonusError::Io {
                path: path.to_path_buf(),
                reason: format!(
                    "decision history: SQLite refused write-ahead logging (journal mode {mode}); put the database on a local disk"
                ),
            });
        }
        conn.pragma_update(None, "synchronous", "FULL")
            .map_err(io)?;
        let tx = conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(io)?;
        let version: i64 = tx
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .map_err(io)?;
        if version > SCHEMA_VERSION {
            return Err(TonusError::Io {
                path: path.to_path_buf(),
                reason: format!(
                    "decision history has schema version {version}, newer than this tonus ({SCHEMA_VERSION}); use a newer tonus"
                ),
            });
        }
        tx.execute_batch(SCHEMA).map_err(io)?;
        // An older file keeps its table: add what version 2 added.
        let present: Vec<String> = {
            let mut stmt = tx
                .prepare("SELECT name FROM pragma_table_info('decisions')")
                .map_err(io)?;
            let names = stmt
                .query_map([], |r| r.get::<_, String>(0))
                .map_err(io)?
                .collect::<std::result::Result<Vec<String>, _>>()
                .map_err(io)?;
            names
        };
        for (name, kind) in V2_COLUMNS {
            if !present.iter().any(|p| p == name) {
                tx.execute_batch(&format!("ALTER TABLE decisions ADD COLUMN {name} {kind}"))
                    .map_err(io)?;
            }
        }
        tx.pragma_update(None, "user_version", SCHEMA_VERSION)
            .map_err(io)?;
        tx.commit().map_err(io)?;
        Ok(History {
            conn,
            path: path.to_path_buf(),
        })
    }

    /// The database file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    fn write_error(&self, e: impl std::fmt::Display) -> TonusError {
        TonusError::Write {
            path: self.path.clone(),
            reason: format!("decision history: {e}"),
        }
    }

    fn read_error(&self, e: impl std::fmt::Display) -> TonusError {
        TonusError::Io {
            path: self.path.clone(),
            reason: format!("decision history: {e}"),
        }
    }

    /// Inserts one row in its own transaction; durable when this returns.
    /// Returns the row's id.
    ///
    /// # Errors
    /// [`TonusError::Write`] when the row cannot be written (disk full,
    /// another writer holding the lock for longer than [`BUSY_TIMEOUT`]).
    pub fn insert(&mut self, row: &Row) -> Result<i64> {
        let reasons = serde_json::to_string(&row.reasons).map_err(|e| self.write_error(e))?;
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(|e| TonusError::Write {
                path: self.path.clone(),
                reason: format!("decision history: {e}"),
            })?;
        let result = tx
            .execute(
                "INSERT INTO decisions (recording_sha256, recording_path, time_utc, time_unix_ms, \
                 station, operator, spec_name, spec_version, spec_sha256, tension_n_per_m, \
                 tension_u_n_per_m, wave_speed_m_per_s, wave_speed_u_m_per_s, modes_used, \
                 rms_residual_cents, grade, decision, rule, reasons, record_json, \
                 anisotropy_percent, anisotropy_u_percent, unevenness_percent, \
                 unevenness_u_percent, calibration_sha256) \
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20, ?21, ?22, ?23, ?24, ?25)",
                params![
                    row.recording_sha256,
                    row.recording_path,
                    row.time.to_rfc3339(),
                    row.time.0,
                    row.station,
                    row.operator,
                    row.spec_name,
                    row.spec_version,
                    row.spec_sha256,
                    finite_or_null(row.tension_n_per_m),
                    finite_or_null(row.tension_u_n_per_m),
                    finite_or_null(row.wave_speed_m_per_s),
                    finite_or_null(row.wave_speed_u_m_per_s),
                    row.modes_used,
                    finite_or_null(row.rms_residual_cents),
                    row.grade,
                    row.decision,
                    row.rule,
                    reasons,
                    row.record_json,
                    finite_or_null(row.anisotropy_percent),
                    finite_or_null(row.anisotropy_u_percent),
                    finite_or_null(row.unevenness_percent),
                    finite_or_null(row.unevenness_u_percent),
                    row.calibration_sha256,
                ],
            )
            .map(|_| tx.last_insert_rowid());
        match result {
            Ok(id) => {
                tx.commit().map_err(|e| TonusError::Write {
                    path: self.path.clone(),
                    reason: format!("decision history: {e}"),
                })?;
                Ok(id)
            }
            Err(e) => Err(TonusError::Write {
                path: self.path.clone(),
                reason: format!("decision history: {e}"),
            }),
        }
    }

    /// Rows matching `filter`, oldest first (by time, then id).
    ///
    /// # Errors
    /// [`TonusError::Io`] when the database cannot be read.
    pub fn query(&self, filter: &Filter) -> Result<Vec<StoredRow>> {
        let mut sql = format!("SELECT {COLUMNS} FROM decisions WHERE 1 = 1");
        let mut args: Vec<rusqlite::types::Value> = Vec::new();
        if let Some(name) = &filter.spec_name {
            args.push(name.clone().into());
            sql.push_str(&format!(" AND spec_name = ?{}", args.len()));
        }
        if let Some(t) = filter.since {
            args.push(t.0.into());
            sql.push_str(&format!(" AND time_unix_ms >= ?{}", args.len()));
        }
        if let Some(t) = filter.until {
            args.push(t.0.into());
            sql.push_str(&format!(" AND time_unix_ms < ?{}", args.len()));
        }
        if let Some(d) = &filter.decision {
            args.push(d.clone().into());
            sql.push_str(&format!(" AND decision = ?{}", args.len()));
        }
        sql.push_str(" ORDER BY time_unix_ms, id");
        let mut stmt = self.conn.prepare(&sql).map_err(|e| self.read_error(e))?;
        let rows = stmt
            .query_map(params_from_iter(args), |r| {
                let reasons: String = r.get(18)?;
                Ok((
                    r.get::<_, i64>(0)?,
                    Row {
                        recording_sha256: r.get(1)?,
                        recording_path: r.get(2)?,
                        time: UtcTime(r.get(3)?),
                        station: r.get(4)?,
                        operator: r.get(5)?,
                        spec_name: r.get(6)?,
                        spec_version: r.get(7)?,
                        spec_sha256: r.get(8)?,
                        tension_n_per_m: r.get(9)?,
                        tension_u_n_per_m: r.get(10)?,
                        wave_speed_m_per_s: r.get(11)?,
                        wave_speed_u_m_per_s: r.get(12)?,
                        modes_used: r.get(13)?,
                        rms_residual_cents: r.get(14)?,
                        grade: r.get(15)?,
                        decision: r.get(16)?,
                        rule: r.get(17)?,
                        reasons: Vec::new(),
                        record_json: r.get(19)?,
                        anisotropy_percent: r.get(20)?,
                        anisotropy_u_percent: r.get(21)?,
                        unevenness_percent: r.get(22)?,
                        unevenness_u_percent: r.get(23)?,
                        calibration_sha256: r.get(24)?,
                    },
                    reasons,
                ))
            })
            .map_err(|e| self.read_error(e))?;
        let mut out = Vec::new();
        for r in rows {
            let (id, mut row, reasons) = r.map_err(|e| self.read_error(e))?;
            row.reasons = serde_json::from_str(&reasons).map_err(|e| {
                self.read_error(format!(
                    "row {id}: reasons are not a JSON list of text: {e}"
                ))
            })?;
            out.push(StoredRow { id, row });
        }
        Ok(out)
    }

    /// Number of rows.
    ///
    /// # Errors
    /// [`TonusError::Io`] when the database cannot be read.
    pub fn count(&self) -> Result<u64> {
        let n: Option<i64> = self
            .conn
            .query_row("SELECT COUNT(*) FROM decisions", [], |r| r.get(0))
            .optional()
            .map_err(|e| self.read_error(e))?;
        Ok(n.unwrap_or(0).max(0) as u64)
    }

    /// Writes the rows matching `filter` as CSV ([`CSV_HEADER`]; empty
    /// fields for missing values; numbers with Rust's shortest exact
    /// representation) and returns how many rows were written.
    ///
    /// # Errors
    /// [`TonusError::Io`] when the database cannot be read,
    /// [`TonusError::Write`] when the writer fails.
    pub fn export_csv<W: Write>(&self, filter: &Filter, out: W) -> Result<usize> {
        let rows = self.query(filter)?;
        let werr = |e: csv::Error| TonusError::Write {
            path: PathBuf::from("CSV export"),
            reason: e.to_string(),
        };
        let mut w = csv::Writer::from_writer(out);
        w.write_record(CSV_HEADER).map_err(werr)?;
        let num = |x: Option<f64>| x.map(|v| v.to_string()).unwrap_or_default();
        for s in &rows {
            let r = &s.row;
            w.write_record([
                s.id.to_string(),
                r.time.to_rfc3339(),
                r.recording_sha256.clone(),
                r.recording_path.clone(),
                r.station.clone().unwrap_or_default(),
                r.operator.clone().unwrap_or_default(),
                r.spec_name.clone(),
                r.spec_version.clone(),
                r.spec_sha256.clone(),
                num(r.tension_n_per_m),
                num(r.tension_u_n_per_m),
                num(r.wave_speed_m_per_s),
                num(r.wave_speed_u_m_per_s),
                r.modes_used.map(|n| n.to_string()).unwrap_or_default(),
                num(r.rms_residual_cents),
                r.grade.clone(),
                r.decision.clone(),
                r.rule.clone(),
                r.reasons.join("; "),
                num(r.anisotropy_percent),
                num(r.anisotropy_u_percent),
                num(r.unevenness_percent),
                num(r.unevenness_u_percent),
                r.calibration_sha256.clone().unwrap_or_default(),
            ])
            .map_err(werr)?;
        }
        w.flush().map_err(|e| TonusError::Write {
            path: PathBuf::from("CSV export"),
            reason: e.to_string(),
        })?;
        Ok(rows.len())
    }
}

/// SQLite stores NaN as NULL anyway; infinities would come back as such,
/// but a history value should be a number or nothing.
fn finite_or_null(x: Option<f64>) -> Option<f64> {
    x.filter(|v| v.is_finite())
}

#[cfg(test)]
mod tests;
