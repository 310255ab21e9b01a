//! Reading a specification file: TOML parsed with spans, every problem
//! collected with its line and reported together; the `[spec]` table and
//! the order of the tables here, `[panel]` in `panel_table`, `[limits]`
//! and `[decision]` in `limits_table`.

use crate::acceptance::decision::{self, DecisionRule, Rule};
use crate::base::error::{Result, TonusError};
use crate::base::hash::sha256_hex;
use crate::base::units::KgPerM2;
use crate::fitting::calibration;
use crate::physics::panel::{Panel, PanelSpec};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use toml::de::{DeTable, DeValue};
use toml::Spanned;

use super::model::SpecModel;
use super::specification::Spec;

impl Spec {
    /// Reads and checks a specification file.
    ///
    /// # Errors
    /// [`TonusError::Io`] when the file cannot be read;
    /// [`TonusError::ConfigFile`] for anything wrong inside it, naming the
    /// line and key.
    pub fn from_file(path: &Path) -> Result<Spec> {
        let bytes = std::fs::read(path).map_err(|e| TonusError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
        Spec::from_bytes(&bytes, path)
    }

    /// Checks a specification given as the file's bytes; `path` is used in
    /// messages and kept in [`Spec::path`].
    ///
    /// # Errors
    /// As [`Spec::from_file`].
    pub fn from_bytes(bytes: &[u8], path: &Path) -> Result<Spec> {
        let fail = |reason: String| TonusError::ConfigFile {
            path: path.to_path_buf(),
            reason,
        };
        let text = std::str::from_utf8(bytes).map_err(|e| {
            fail(format!(
                "line {}: not UTF-8 text; save the file as UTF-8",
                line_of(bytes, e.valid_up_to())
            ))
        })?;
        let doc = DeTable::parse(text).map_err(|e| {
            let line = e.span().map(|s| line_of(bytes, s.start)).unwrap_or(1);
            fail(format!(
                "line {line}: not valid TOML: {}",
                e.message().trim()
            ))
        })?;
        let mut ld = Loader {
            bytes,
            dir: path.parent().map(Path::to_path_buf).unwrap_or_default(),
            problems: Vec::new(),
        };
        let spec = ld.load(doc.get_ref(), path, sha256_hex(bytes));
        if ld.problems.is_empty() {
            if let Some(spec) = spec {
                return Ok(spec);
            }
        }
        ld.problems.sort_by_key(|p| p.0);
        let text: Vec<String> = ld
            .problems
            .iter()
            .map(|(line, msg)| match line {
                Some(l) => format!("line {l}: {msg}"),
                None => msg.clone(),
            })
            .collect();
        Err(fail(if text.is_empty() {
            "the specification could not be read".into()
        } else {
            text.join(" | ")
        }))
    }
}

/// 1-based line number of byte `offset` in `bytes`.
pub(super) fn line_of(bytes: &[u8], offset: usize) -> usize {
    let end = offset.min(bytes.len());
    bytes[..end].iter().filter(|&&b| b == b'\n').count() + 1
}

/// Keys of each table: (name, required).
pub(super) const SPEC_KEYS: &[&str] = &["name", "version", "note"];
pub(super) const PANEL_KEYS: &[&str] = &[
    "shape",
    "width",
    "height",
    "diameter",
    "radius",
    "areal-density",
    "thickness",
    "density",
    "tap-at",
    "pickup-at",
    "areal-density-u",
    "model",
    "calibration",
    "note",
];
pub(super) const LIMITS_KEYS: &[&str] = &[
    "nominal-tension",
    "lower-tension",
    "upper-tension",
    "max-anisotropy-percent",
    "max-unevenness-percent",
    "min-quality",
];
pub(super) const DECISION_KEYS: &[&str] = &["rule", "coverage-factor"];
pub(super) const TABLES: &[&str] = &["spec", "panel", "limits", "decision"];

/// Levenshtein distance, for "did you mean" hints.
pub(super) fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let cur = row[j + 1];
            row[j + 1] = (prev + usize::from(ca != cb)).min(row[j] + 1).min(cur + 1);
            prev = cur;
        }
    }
    row[b.len()]
}

pub(super) fn hint(word: &str, known: &[&str]) -> String {
    known
        .iter()
        .map(|k| (edit_distance(word, k), k))
        .filter(|(d, _)| *d <= 2)
        .min()
        .map(|(_, k)| format!("did you mean '{k}'? "))
        .unwrap_or_default()
}

/// The message of a quantity parsing error, without the key (which the
/// caller puts in front).
pub(super) fn quantity_problem(e: TonusError) -> String {
    match e {
        TonusError::BadQuantity {
            value,
            expected,
            example,
            ..
        } => format!("cannot read {value:?} as {expected}; write e.g. {example}"),
        TonusError::OutOfRange { value, why, .. } => format!("{value:?} is not allowed: {why}"),
        other => other.to_string(),
    }
}

/// One table of the file with its keys (hyphenated) and their spans.
pub(super) struct Section<'a, 'i> {
    pub(super) name: &'static str,
    pub(super) line: Option<usize>,
    pub(super) entries: Vec<(String, &'a Spanned<DeValue<'i>>)>,
}

impl<'a, 'i> Section<'a, 'i> {
    pub(super) fn get(&self, key: &str) -> Option<&'a Spanned<DeValue<'i>>> {
        self.entries.iter().find(|(k, _)| k == key).map(|(_, v)| *v)
    }
}

pub(super) struct Loader<'b> {
    pub(super) bytes: &'b [u8],
    /// The specification's folder: a relative calibration path starts here.
    pub(super) dir: PathBuf,
    pub(super) problems: Vec<(Option<usize>, String)>,
}

/// What `[panel]` gives the rest of the file.
#[derive(Default)]
pub(super) struct PanelPart {
    pub(super) panel: Option<Panel>,
    pub(super) spec: Option<PanelSpec>,
    pub(super) density_u: Option<KgPerM2>,
    pub(super) model: Option<SpecModel>,
    /// Circle or rectangle, when the shape could be read.
    pub(super) is_circle: Option<bool>,
    /// Width equals height (square panel), when both could be read.
    pub(super) is_square: Option<bool>,
    /// `Some(None)` without a calibration key; None when it failed.
    pub(super) calibration: Option<Option<(Arc<calibration::Loaded>, String)>>,
}

impl<'b> Loader<'b> {
    pub(super) fn line(&self, offset: usize) -> usize {
        line_of(self.bytes, offset)
    }

    pub(super) fn problem(&mut self, line: Option<usize>, msg: String) {
        self.problems.push((line, msg));
    }

    /// Finds table `name`, checks its keys against `known`.
    pub(super) fn section<'a, 'i>(
        &mut self,
        top: &'a DeTable<'i>,
        name: &'static str,
        known: &[&str],
    ) -> Section<'a, 'i> {
        let mut s = Section {
            name,
            line: None,
            entries: Vec::new(),
        };
        let Some((key, value)) = top.iter().find(|(k, _)| &**k.get_ref() == name) else {
            self.problem(
                None,
                format!("the file has no [{name}] table; add it (see the example in the documentation of tonus::acceptance::spec)"),
            );
            return s;
        };
        let line = self.line(key.span().start);
        s.line = Some(line);
        let Some(table) = value.get_ref().as_table() else {
            self.problem(
                Some(line),
                format!(
                    "'{name}' must be a table [{name}]; found a {}",
                    value.get_ref().type_str()
                ),
            );
            return s;
        };
        for (k, v) in table.iter() {
            let raw: &str = k.get_ref().as_ref();
            let hyphenated = raw.replace('_', "-");
            let kline = self.line(k.span().start);
            if !known.contains(&hyphenated.as_str()) {
                self.problem(
                    Some(kline),
                    format!(
                        "key '{raw}' in [{name}] is unknown; {}known keys: {}",
                        hint(&hyphenated, known),
                        known.join(", ")
                    ),
                );
                continue;
            }
            s.entries.push((hyphenated, v));
        }
        s
    }

    /// A string value; `what` describes it for messages ("a length, e.g.
    /// \"400mm\"").
    pub(super) fn string(
        &mut self,
        s: &Section,
        key: &str,
        what: &str,
        required: bool,
    ) -> Option<(usize, String)> {
        let Some(v) = s.get(key) else {
            if required {
                let at = s.line;
                self.problem(at, format!("[{}] lacks key '{key}': {what}", s.name));
            }
            return None;
        };
        let line = self.line(v.span().start);
        match v.get_ref().as_str() {
            Some(text) => Some((line, text.to_string())),
            None => {
                self.problem(
                    Some(line),
                    format!(
                        "key '{key}': must be a string in quotes, {what}; found a {}",
                        v.get_ref().type_str()
                    ),
                );
                None
            }
        }
    }

    /// A number (TOML integer or float) that must be finite and positive.
    pub(super) fn positive_number(
        &mut self,
        s: &Section,
        key: &str,
        example: &str,
    ) -> Option<(usize, f64)> {
        let v = s.get(key)?;
        let line = self.line(v.span().start);
        let parsed = match v.get_ref() {
            DeValue::Integer(i) => {
                let digits = i.as_str().replace('_', "");
                i64::from_str_radix(digits.trim_start_matches('+'), i.radix())
                    .ok()
                    .map(|n| n as f64)
            }
            DeValue::Float(f) => f.as_str().replace('_', "").parse::<f64>().ok(),
            _ => None,
        };
        match parsed {
            Some(x) if x.is_finite() && x > 0.0 => Some((line, x)),
            Some(x) => {
                self.problem(
                    Some(line),
                    format!("key '{key}': {x} is not allowed: it must be a number greater than zero, e.g. {example}"),
                );
                None
            }
            None => {
                self.problem(
                    Some(line),
                    format!(
                        "key '{key}': must be a number without quotes, e.g. {key} = {example}; found a {}",
                        v.get_ref().type_str()
                    ),
                );
                None
            }
        }
    }

    /// Parses a quantity string with `parse`, reporting under `key`.
    pub(super) fn quantity<T>(
        &mut self,
        s: &Section,
        key: &str,
        what: &str,
        required: bool,
        parse: fn(&str, &str) -> Result<T>,
    ) -> Option<(usize, String, T)> {
        let (line, text) = self.string(s, key, what, required)?;
        match parse(key, &text) {
            Ok(v) => Some((line, text, v)),
            Err(e) => {
                self.problem(Some(line), format!("key '{key}': {}", quantity_problem(e)));
                None
            }
        }
    }

    pub(super) fn load(&mut self, top: &DeTable, path: &Path, hash: String) -> Option<Spec> {
        for (k, _) in top.iter() {
            let raw: &str = k.get_ref().as_ref();
            if !TABLES.contains(&raw) {
                let line = self.line(k.span().start);
                self.problem(
                    Some(line),
                    format!(
                        "'{raw}' is unknown at the top level; {}a specification has the tables [spec], [panel], [limits], [decision]",
                        hint(raw, TABLES)
                    ),
                );
            }
        }
        let spec_t = self.section(top, "spec", SPEC_KEYS);
        let panel_t = self.section(top, "panel", PANEL_KEYS);
        let limits_t = self.section(top, "limits", LIMITS_KEYS);
        let decision_t = self.section(top, "decision", DECISION_KEYS);

        // [spec]
        let text_key = |ld: &mut Self, key: &str, what: &str, required: bool| {
            let got = ld.string(&spec_t, key, what, required)?;
            if got.1.trim().is_empty() {
                ld.problem(
                    Some(got.0),
                    format!("key '{key}': must not be empty; {what}"),
                );
                return None;
            }
            Some(got.1.trim().to_string())
        };
        let name = text_key(
            self,
            "name",
            "the specification's name, e.g. \"screen-500x400-20Ncm\"",
            spec_t.line.is_some(),
        );
        let version = text_key(
            self,
            "version",
            "the specification's version, e.g. \"3\"",
            spec_t.line.is_some(),
        );
        let note = text_key(self, "note", "a note", false);

        // [panel]
        let pp = self.load_panel(&panel_t);

        // [limits]
        let limits = self.load_limits(&limits_t, &pp);

        // [decision]
        let rule = if decision_t.line.is_some() {
            let r = self
                .string(&decision_t, "rule", "\"simple\" or \"guarded\"", true)
                .and_then(|(line, text)| match Rule::from_name(&text) {
                    Some(r) => Some(r),
                    None => {
                        self.problem(
                            Some(line),
                            format!("key 'rule': {text:?} is not a decision rule; write \"simple\" (shared risk) or \"guarded\" (guard band w = k·u)"),
                        );
                        None
                    }
                });
            let k = match decision_t.get("coverage-factor") {
                None => Some(decision::DEFAULT_COVERAGE_FACTOR),
                Some(_) => self
                    .positive_number(&decision_t, "coverage-factor", "2")
                    .map(|(_, k)| k),
            };
            match (r, k) {
                (Some(rule), Some(coverage_factor)) => Some(DecisionRule {
                    rule,
                    coverage_factor,
                }),
                _ => None,
            }
        } else {
            None
        };

        let calibration = pp.calibration?;
        Some(Spec {
            path: path.to_path_buf(),
            name: name?,
            version: version?,
            note,
            hash,
            panel_spec: pp.spec?,
            areal_density_u: pp.density_u?,
            model: pp.model?,
            limits: limits?,
            rule: rule?,
            calibration_sha256: calibration.as_ref().map(|c| c.1.clone()),
            calibration: calibration.map(|c| c.0),
            panel: pp.panel?,
        })
    }
}
