//! `tonus round --points`: taps at several points of a rectangular panel
//! or screen, one recording of them all, one recording per tap in tap
//! order, or standard input read to its end; each tap fitted with the
//! biaxial model at its own tap point, as `tonus fit --model biaxial
//! --tap-at X,Y` would, then the axis and Tx, Ty over the taps
//! ([`crate::fitting::round_points`]).

use crate::app::cli::RoundArgs;
use crate::app::commands::Outcome;
use crate::base::error::{Result, TonusError};
use crate::fitting::round_points::{self as points, PointTap};
use crate::fitting::round_taps::tap_recording;
use crate::physics::membrane::Shape;
use crate::physics::panel::Panel;
use crate::report::round_points::{self as report, PointsSetting};
use crate::signal::stream::{AudioStream, PcmFormat, SampleKind, TapFinder};
use std::path::{Path, PathBuf};

/// Most tap points accepted.
pub const MAX_POINTS: usize = 64;

/// Parses `--points "x1,y1 x2,y2 …"` (spaces or semicolons between points).
///
/// # Errors
/// A malformed point, or fewer than two points.
pub fn parse_points(text: &str, shape: &Shape) -> Result<Vec<(f64, f64)>> {
    let pts = text
        .split(|c: char| c.is_whitespace() || c == ';')
        .filter(|p| !p.is_empty())
        .map(|p| {
            crate::physics::panel::parse_point("--points", p, shape)
                .map(|q| (q.u, q.v.unwrap_or(0.5)))
        })
        .collect::<Result<Vec<_>>>()?;
    if !(2..=MAX_POINTS).contains(&pts.len()) {
        return Err(TonusError::OutOfRange {
            key: "--points".into(),
            value: text.into(),
            why: format!("give 2 to {MAX_POINTS} tap points \"x,y\" (fractions of width and height), separated by spaces, in tap order"),
        });
    }
    Ok(pts)
}

/// The samples and the onsets of the taps, one recording or one per tap.
struct Heard {
    /// (samples, rate, onsets, name) per recording.
    parts: Vec<(Vec<f64>, f64, Vec<usize>, PathBuf)>,
    source: String,
    stem: String,
}

fn count_error(path: &Path, found: usize, want: usize) -> TonusError {
    TonusError::BadRecording {
        path: path.to_path_buf(),
        problem: format!("found {found} tap(s), expected {want} (one for each of --points)"),
        hint: "tap once at each point, in the order of --points, about a second apart (or give one recording per point)".into(),
    }
}

fn hear(a: &RoundArgs, n: usize) -> Result<Heard> {
    let channel = a.input.channel()?;
    let stdin = a.recordings.len() == 1 && a.recordings[0].as_os_str() == "-";
    if stdin {
        let pcm = match a.pcm_rate {
            Some(rate) => Some(PcmFormat {
                rate_hz: rate,
                channels: a.pcm_channels,
                kind: SampleKind::parse("--pcm-format", &a.pcm_format)?,
            }),
            None => None,
        };
        let name = PathBuf::from("standard input");
        let stdin = std::io::stdin();
        let mut stream = AudioStream::open(stdin.lock(), pcm, name.clone())?;
        let rate = stream.rate_hz as f64;
        let mut samples = Vec::new();
        while let Some(chunk) = stream.next_chunk()? {
            samples.extend_from_slice(&chunk);
        }
        let onsets = TapFinder::new(rate).feed(&samples);
        if onsets.len() != n {
            return Err(count_error(&name, onsets.len(), n));
        }
        return Ok(Heard {
            parts: vec![(samples, rate, onsets, name)],
            source: "standard input".into(),
            stem: "panel".into(),
        });
    }
    if a.pcm_rate.is_some() {
        return Err(TonusError::Panel(
            "--pcm-rate reads raw PCM from standard input: give \"-\" as the recording".into(),
        ));
    }
    if a.recordings.len() != 1 && a.recordings.len() != n {
        return Err(TonusError::Panel(format!(
            "{} recordings for {} points: give one recording of all the taps, or one per point in the order of --points",
            a.recordings.len(),
            n
        )));
    }
    let mut parts = Vec::new();
    for path in &a.recordings {
        let rec = crate::signal::recording::read_audio(path, channel)?;
        let mut onsets = TapFinder::new(rec.sample_rate_hz).feed(&rec.samples);
        if a.recordings.len() == 1 && onsets.len() != n {
            return Err(count_error(path, onsets.len(), n));
        }
        if onsets.is_empty() {
            return Err(count_error(path, 0, 1));
        }
        if a.recordings.len() > 1 {
            onsets.truncate(1);
        }
        parts.push((rec.samples, rec.sample_rate_hz, onsets, path.clone()));
    }
    let first = &a.recordings[0];
    let last = &a.recordings[a.recordings.len() - 1];
    Ok(Heard {
        parts,
        source: if a.recordings.len() == 1 {
            first.display().to_string()
        } else {
            format!("{} … {}", first.display(), last.display())
        },
        stem: first
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "panel".into()),
    })
}

fn write_outputs(
    dir: &Path,
    stem: &str,
    s: &PointsSetting,
    r: &points::PointsResult,
) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| TonusError::Write {
        path: dir.to_path_buf(),
        reason: e.to_string(),
    })?;
    let json = serde_json::to_string_pretty(&report::json(s, r)).unwrap_or_default();
    crate::base::files::write_atomic(&dir.join(format!("{stem}.points.json")), json.as_bytes())?;
    crate::base::files::write_atomic(
        &dir.join(format!("{stem}.points.md")),
        report::markdown(s, r).as_bytes(),
    )
}

/// `tonus round --points`.
///
/// # Errors
/// Bad flags, a panel that is not a rectangle, unreadable input, a tap
/// count that does not match the points.
pub fn run(a: &RoundArgs, points_text: &str, print: &mut dyn FnMut(&str)) -> Result<Outcome> {
    let panel: Panel = a.panel.to_panel()?;
    let Shape::Rectangle { width, height } = panel.shape else {
        return Err(TonusError::Panel(
            "--points surveys a rectangular panel or screen (--width, --height); for a head give --lugs".into(),
        ));
    };
    let pts = parse_points(points_text, &panel.shape)?;
    if let Some(m) = a.model.as_deref() {
        if !m.eq_ignore_ascii_case("biaxial") {
            return Err(TonusError::Panel(format!(
                "--model {m}: a panel surveyed at --points is fitted with the biaxial model; leave --model out"
            )));
        }
    }
    let opts = crate::fitting::pipeline::FitOptions {
        aspect_search: false,
        ..crate::app::options::fit_options(false, Some("biaxial"), &a.input)?
    };
    let heard = hear(a, pts.len())?;
    let unit = if panel.areal_density.is_some() {
        "N/m"
    } else {
        "m2/s2"
    };
    let mut taps: Vec<PointTap> = Vec::new();
    for (k, &(x, y)) in pts.iter().enumerate() {
        let (samples, rate, onsets, name) = if heard.parts.len() == 1 {
            let p = &heard.parts[0];
            (&p.0, p.1, &p.2, &p.3)
        } else {
            let p = &heard.parts[k];
            (&p.0, p.1, &p.2, &p.3)
        };
        let i = if heard.parts.len() == 1 { k } else { 0 };
        let rec = tap_recording(samples, rate, onsets, i, name);
        let tap_panel = Panel {
            tap: Some(crate::physics::membrane::Point { u: x, v: Some(y) }),
            ..panel.clone()
        };
        let m = crate::fitting::pipeline::measure(&rec, &tap_panel, &opts)?;
        let t = PointTap::from_measurement(
            k + 1,
            (x, y),
            onsets[i] as f64 / rate,
            &m,
            width.0,
            height.0,
        );
        if !a.json {
            print(&report::tap_line(&t, unit));
        }
        taps.push(t);
    }
    let result = points::conclude(taps, unit);
    let setting = PointsSetting {
        source: heard.source,
        panel: panel.describe(),
    };
    if let Some(dir) = &a.out {
        write_outputs(dir, &heard.stem, &setting, &result)?;
    }
    if a.json {
        print(&serde_json::to_string(&report::json(&setting, &result)).unwrap_or_default());
    } else {
        print(&report::text(&setting, &result));
    }
    Ok(Outcome {
        stdout: String::new(),
        stderr: String::new(),
        exit: 0,
    })
}
