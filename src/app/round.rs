//! `tonus round`: a round of taps, one near each lug of a drum head, from
//! one recording, one recording per lug, or a live stream on standard
//! input; each tap decided as it is heard, then the tension pattern, each
//! lug's deviation and what to turn.
//!
//! Exit status: 0 every round finished; 2 a usage or input error (a tap
//! count that does not match the lugs, an unreadable stream, a stream
//! that ended inside a round); 130/143 stopped by SIGINT/SIGTERM inside a
//! round (a finished round's report is written before its next round
//! starts).

use crate::acceptance::lug_advice::{self, Advice};
use crate::app::cli::{RoundArgs, RoundSynthArgs};
use crate::app::commands::Outcome;
use crate::base::error::{Result, TonusError};
use crate::fitting::pipeline::FitOptions;
use crate::fitting::round;
use crate::fitting::round_taps::{self as taps, RoundResult, RoundTap};
use crate::physics::membrane::Shape;
use crate::physics::panel::Panel;
use crate::report::round::{self as round_report, RoundSetting};
use crate::signal::stream::{AudioStream, PcmFormat, SampleKind, TapFinder};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Largest lug count accepted.
pub const MAX_LUGS: usize = 64;

/// The validated settings of a round.
pub struct Settings {
    lugs: usize,
    panel: Panel,
    opts: FitOptions,
    angles: Vec<f64>,
    clockwise: bool,
    tolerance_pct: f64,
    rating: Option<f64>,
}

/// Checks the flags.
///
/// # Errors
/// A flag out of range or malformed, a panel that is not a circle.
pub fn settings(a: &RoundArgs) -> Result<Settings> {
    let lugs = a.lugs.unwrap_or(0);
    if !(3..=MAX_LUGS).contains(&lugs) {
        return Err(TonusError::OutOfRange {
            key: "--lugs".into(),
            value: lugs.to_string(),
            why: format!("a round needs 3 to {MAX_LUGS} lugs, one tap near each"),
        });
    }
    let clockwise = match a.direction.to_ascii_lowercase().as_str() {
        "cw" | "clockwise" => true,
        "ccw" | "counter-clockwise" | "anticlockwise" => false,
        other => {
            return Err(TonusError::BadQuantity {
                key: "--direction".into(),
                value: other.into(),
                expected: "cw or ccw (lug numbers going round, seen from above)".into(),
                example: "cw".into(),
            })
        }
    };
    let tol = a.tolerance.trim();
    let tolerance_pct = tol
        .strip_suffix('%')
        .and_then(|v| v.trim().parse::<f64>().ok())
        .ok_or_else(|| TonusError::BadQuantity {
            key: "--tolerance".into(),
            value: tol.into(),
            expected: "a percentage of the mean tension".into(),
            example: "1%".into(),
        })?;
    if !(tolerance_pct > 0.0 && tolerance_pct <= 50.0) {
        return Err(TonusError::OutOfRange {
            key: "--tolerance".into(),
            value: tol.into(),
            why: "choose more than 0 % and at most 50 %".into(),
        });
    }
    if !a.first_lug.is_finite() {
        return Err(TonusError::OutOfRange {
            key: "--first-lug".into(),
            value: a.first_lug.to_string(),
            why: "give the angle of lug 1 in degrees".into(),
        });
    }
    let panel = a.panel.to_panel()?;
    if !matches!(panel.shape, Shape::Circle { .. }) {
        return Err(TonusError::Panel(
            "a round of taps needs a circular head (--diameter or --radius); for a panel or screen give --points instead of --lugs".into(),
        ));
    }
    let model = a.model.clone().or(a.panel.to_spec()?.model);
    let opts = crate::app::options::fit_options(false, model.as_deref(), &a.input)?;
    if !matches!(
        opts.model,
        crate::fitting::fit::FitModel::Isotropic | crate::fitting::fit::FitModel::AirLoaded
    ) {
        return Err(TonusError::Panel(format!(
            "--model {}: a round fits a circle with the isotropic or air model",
            model.unwrap_or_default()
        )));
    }
    if a.input.peaks_only {
        return Err(TonusError::Panel(
            "--peaks-only resolves no split pair, and a round reads the pattern from split pairs: leave it out".into(),
        ));
    }
    let rating = a
        .rating
        .as_deref()
        .map(|r| crate::base::units::parse_tension("--rating", r).map(|t| t.0))
        .transpose()?;
    Ok(Settings {
        angles: round::lug_angles(lugs, a.first_lug, clockwise),
        lugs,
        panel,
        opts,
        clockwise,
        tolerance_pct,
        rating,
    })
}

fn unit_of(panel: &Panel) -> &'static str {
    if panel.areal_density.is_some() {
        "N/m"
    } else {
        "m2/s2"
    }
}

/// One line per decided tap.
pub fn tap_line(t: &RoundTap, unit: &str) -> String {
    format!(
        "lug {:>2} at {:>3.0}°  {}  {}  split pairs: {}",
        t.lug,
        t.angle_deg,
        t.value
            .map(|e| format!(
                "T = {}",
                crate::report::text::pm(e.value, e.standard_uncertainty, unit)
            ))
            .unwrap_or_else(|| "not fitted".into()),
        t.grade.name(),
        if t.split_pairs.is_empty() {
            "none".to_string()
        } else {
            t.split_pairs.join(" ")
        }
    )
}

/// Finishes a round: advice, the outputs, the printed result.
fn finish_round(
    a: &RoundArgs,
    s: &Settings,
    source: &str,
    stem: &str,
    result: RoundResult,
    print: &mut dyn FnMut(&str),
) -> Result<()> {
    let advice: Advice = lug_advice::advise(
        &result.pattern,
        result.mean,
        result.unit,
        s.tolerance_pct,
        s.rating,
    );
    let Shape::Circle { radius } = s.panel.shape else {
        unreachable!("checked in settings")
    };
    let setting = RoundSetting {
        source: source.to_string(),
        panel: s.panel.describe(),
        diameter_m: 2.0 * radius.0,
        areal_density: s.panel.areal_density.map(|d| d.0),
        lugs: s.lugs,
        first_deg: a.first_lug,
        clockwise: s.clockwise,
    };
    if let Some(dir) = &a.out {
        std::fs::create_dir_all(dir).map_err(|e| TonusError::Write {
            path: dir.clone(),
            reason: e.to_string(),
        })?;
        let title = format!("{source} — round of {} lugs, {}", s.lugs, setting.panel);
        let png = crate::report::round_png::render(&title, &result, &advice, &s.angles).map_err(
            |reason| TonusError::Write {
                path: dir.join(format!("{stem}.round.png")),
                reason,
            },
        )?;
        let png_name = format!("{stem}.round.png");
        let json = serde_json::to_string_pretty(&round_report::json(&setting, &result, &advice))
            .unwrap_or_default();
        crate::base::files::write_atomic(&dir.join(&png_name), &png)?;
        crate::base::files::write_atomic(&dir.join(format!("{stem}.round.json")), json.as_bytes())?;
        crate::base::files::write_atomic(
            &dir.join(format!("{stem}.round.md")),
            round_report::markdown(&setting, &result, &advice, Some(&png_name)).as_bytes(),
        )?;
        crate::base::files::write_atomic(
            &dir.join(format!("{stem}.round.html")),
            round_report::html(&setting, &result, &advice, Some(&png)).as_bytes(),
        )?;
    }
    if a.json {
        print(
            &serde_json::to_string(&round_report::json(&setting, &result, &advice))
                .unwrap_or_default(),
        );
    } else {
        print(&round_report::text(&setting, &result, &advice));
    }
    Ok(())
}

/// `tonus round` on files or standard input; `print` gets each line as
/// soon as it is ready (each tap, then each round).
///
/// # Errors
/// Bad flags, unreadable input, a tap count that does not match the lugs.
pub fn run(a: &RoundArgs, print: &mut dyn FnMut(&str)) -> Result<Outcome> {
    if let Some(points) = &a.points {
        return crate::app::round_points::run(a, points, print);
    }
    let s = settings(a)?;
    let stdin = a.recordings.len() == 1 && a.recordings[0].as_os_str() == "-";
    if stdin {
        return run_stream(a, &s, print);
    }
    if a.pcm_rate.is_some() {
        return Err(TonusError::Panel(
            "--pcm-rate reads raw PCM from standard input: give \"-\" as the recording".into(),
        ));
    }
    let unit = unit_of(&s.panel);
    let channel = a.input.channel()?;
    let mut taps = Vec::new();
    let source;
    let stem;
    if a.recordings.len() == 1 {
        let path = &a.recordings[0];
        let rec = crate::signal::recording::read_audio(path, channel)?;
        let onsets = TapFinder::new(rec.sample_rate_hz).feed(&rec.samples);
        if onsets.len() != s.lugs {
            return Err(TonusError::BadRecording {
                path: path.clone(),
                problem: format!(
                    "found {} tap(s), expected {} (one near each lug, --lugs {})",
                    onsets.len(),
                    s.lugs,
                    s.lugs
                ),
                hint: if onsets.len() < s.lugs {
                    "a lug was missed or tapped too softly: tap the whole round again, one firm tap per lug, about a second apart".into()
                } else {
                    "a lug was tapped twice or something else knocked: tap the whole round again, one tap per lug, about a second apart".into()
                },
            });
        }
        for (i, &ang) in s.angles.iter().enumerate() {
            let t = taps::measure_tap(
                &rec.samples,
                rec.sample_rate_hz,
                &onsets,
                i,
                ang,
                &s.panel,
                &s.opts,
                path,
            )?;
            if !a.json {
                print(&tap_line(&t, unit));
            }
            taps.push(t);
        }
        source = path.display().to_string();
        stem = file_stem(path);
    } else {
        if a.recordings.len() != s.lugs {
            return Err(TonusError::Panel(format!(
                "{} recordings for {} lugs: give one recording of the whole round, or one per lug in lug order",
                a.recordings.len(),
                s.lugs
            )));
        }
        for (i, (path, &ang)) in a.recordings.iter().zip(&s.angles).enumerate() {
            let rec = crate::signal::recording::read_audio(path, channel)?;
            let onsets = TapFinder::new(rec.sample_rate_hz).feed(&rec.samples);
            let Some(&first) = onsets.first() else {
                return Err(TonusError::BadRecording {
                    path: path.clone(),
                    problem: format!("no tap found (lug {})", i + 1),
                    hint: "record the tap with some quiet before it".into(),
                });
            };
            let mut t = taps::measure_tap(
                &rec.samples,
                rec.sample_rate_hz,
                &[first],
                0,
                ang,
                &s.panel,
                &s.opts,
                path,
            )?;
            t.lug = i + 1;
            if !a.json {
                print(&tap_line(&t, unit));
            }
            taps.push(t);
        }
        source = format!(
            "{} … {}",
            a.recordings[0].display(),
            a.recordings[a.recordings.len() - 1].display()
        );
        stem = file_stem(&a.recordings[0]);
    }
    let result = taps::conclude(taps, unit);
    finish_round(a, &s, &source, &stem, result, print)?;
    Ok(Outcome {
        stdout: String::new(),
        stderr: String::new(),
        exit: 0,
    })
}

fn file_stem(p: &Path) -> String {
    p.file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "round".into())
}

/// Where a live round stands.
struct Live {
    /// Samples kept, from absolute index `base`.
    buf: Vec<f64>,
    base: usize,
    /// Onsets (absolute) of the current round and any after it.
    onsets: Vec<usize>,
    taps: Vec<RoundTap>,
    rounds_done: usize,
}

/// The live bench: reads standard input until it ends, a stop signal
/// arrives, or `--rounds` rounds are finished.
fn run_stream(a: &RoundArgs, s: &Settings, print: &mut dyn FnMut(&str)) -> Result<Outcome> {
    let pcm = match a.pcm_rate {
        Some(rate) => Some(PcmFormat {
            rate_hz: rate,
            channels: a.pcm_channels,
            kind: SampleKind::parse("--pcm-format", &a.pcm_format)?,
        }),
        None => None,
    };
    crate::app::batch::stop_on_signals()?;
    let stdin = std::io::stdin();
    let mut stream = AudioStream::open(stdin.lock(), pcm, PathBuf::from("standard input"))?;
    let outcome = live(&mut stream, a, s, print, &mut |_| {})?;
    Ok(outcome)
}

// Size: one loop read top to bottom — read a chunk, decide the taps whose
// window is complete, finish a round, trim the buffer, handle the end.
/// The live loop on any stream (public for the benchmark and the tests):
/// `on_decided` gets the time each round's result took after the last
/// sample it needed had arrived.
///
/// # Errors
/// As [`run`].
pub fn live<R: std::io::Read>(
    stream: &mut AudioStream<R>,
    a: &RoundArgs,
    s: &Settings,
    print: &mut dyn FnMut(&str),
    on_decided: &mut dyn FnMut(std::time::Duration),
) -> Result<Outcome> {
    let rate = stream.rate_hz as f64;
    let unit = unit_of(&s.panel);
    let mut finder = TapFinder::new(rate);
    let window = (taps::TAP_WINDOW_S * rate) as usize;
    let keep = (taps::BACKGROUND_S * rate) as usize + finder.delay_samples();
    let mut st = Live {
        buf: Vec::new(),
        base: 0,
        onsets: Vec::new(),
        taps: Vec::new(),
        rounds_done: 0,
    };
    let name = PathBuf::from("standard input");
    let mut ended = false;
    loop {
        if let Some(sig) = crate::app::batch::stop_requested() {
            print(&format!(
                "stopped by {} after {} of {} taps of round {}",
                if sig == libc::SIGINT {
                    "SIGINT"
                } else {
                    "SIGTERM"
                },
                st.taps.len(),
                s.lugs,
                st.rounds_done + 1
            ));
            return Ok(Outcome {
                stdout: String::new(),
                stderr: String::new(),
                exit: if st.taps.is_empty() {
                    0
                } else {
                    128 + sig as u8
                },
            });
        }
        match stream.next_chunk()? {
            Some(chunk) => {
                let start = st.base + st.buf.len();
                st.buf.extend_from_slice(&chunk);
                debug_assert!(start >= st.base);
                st.onsets.extend(finder.feed(&chunk));
            }
            None => ended = true,
        }
        let arrived = Instant::now();
        // Decide every tap whose window is complete (or all, at the end).
        while st.taps.len() < s.lugs && st.taps.len() < st.onsets.len() {
            let i = st.taps.len();
            let on = st.onsets[i];
            let have = st.base + st.buf.len();
            let next_known = st.onsets.get(i + 1).is_some_and(|&n| n < on + window);
            if !(ended || next_known || have >= on + window + finder.delay_samples()) {
                break;
            }
            let rel: Vec<usize> = st.onsets.iter().map(|&o| o - st.base).collect();
            let mut t = taps::measure_tap(
                &st.buf,
                rate,
                &rel[..(i + 2).min(rel.len())],
                i,
                s.angles[i],
                &s.panel,
                &s.opts,
                &name,
            )?;
            // Onsets are kept from the start of the stream; the buffer
            // starts later once a round has been trimmed away.
            t.onset_s = on as f64 / rate;
            if !a.json {
                print(&tap_line(&t, unit));
            }
            st.taps.push(t);
        }
        if st.taps.len() == s.lugs {
            let taps = std::mem::take(&mut st.taps);
            let result = taps::conclude(taps, unit);
            st.rounds_done += 1;
            let source = format!("standard input, round {}", st.rounds_done);
            let stem = format!("round-{}", st.rounds_done);
            finish_round(a, s, &source, &stem, result, print)?;
            on_decided(arrived.elapsed());
            // The next round starts with the next onset; keep only what
            // its background may need.
            st.onsets.drain(..s.lugs);
            let have = st.base + st.buf.len();
            let cut = have.saturating_sub(keep).max(st.base);
            let cut = st
                .onsets
                .first()
                .map(|&o| cut.min(o.saturating_sub(keep)))
                .unwrap_or(cut)
                .max(st.base);
            st.buf.drain(..cut - st.base);
            st.base = cut;
            if a.rounds.is_some_and(|r| st.rounds_done >= r) {
                break;
            }
        }
        if ended {
            if !st.taps.is_empty() || !st.onsets.is_empty() {
                return Err(TonusError::BadRecording {
                    path: name,
                    problem: format!(
                        "the stream ended after {} of {} taps of round {}",
                        st.onsets.len().min(s.lugs),
                        s.lugs,
                        st.rounds_done + 1
                    ),
                    hint: "no result for that round: tap every lug of the round before stopping the recorder".into(),
                });
            }
            if st.rounds_done == 0 {
                return Err(TonusError::BadRecording {
                    path: name,
                    problem: format!(
                        "the stream ended with no tap heard ({:.1} s of audio)",
                        (st.base + st.buf.len()) as f64 / rate
                    ),
                    hint: "check the recorder's input and level (and --pcm-rate/--pcm-format for raw PCM), then tap near each lug".into(),
                });
            }
            break;
        }
    }
    Ok(Outcome {
        stdout: String::new(),
        stderr: String::new(),
        exit: 0,
    })
}

impl RoundSynthArgs {
    /// Puts the pattern into `cfg`.
    ///
    /// # Errors
    /// A malformed --pattern-order, an odd order or one below 4.
    pub fn apply(&self, cfg: &mut crate::physics::synth::SynthConfig) -> Result<()> {
        if let Some(a) = self.skew_angle {
            cfg.skew_angle_deg = a;
        }
        for p in &self.pattern_order {
            let bad = || {
                TonusError::BadQuantity {
                key: "--pattern-order".into(),
                value: p.clone(),
                expected: "ORDER:AMPLITUDE:ANGLE with an even order of at least 4, the amplitude in % and the angle in degrees".into(),
                example: "4:3%:10".into(),
            }
            };
            let parts: Vec<&str> = p.split(':').collect();
            let [o, d, th] = parts[..] else {
                return Err(bad());
            };
            let order: u32 = o.trim().parse().map_err(|_| bad())?;
            let amp: f64 = d
                .trim()
                .strip_suffix('%')
                .and_then(|v| v.parse::<f64>().ok())
                .ok_or_else(bad)?;
            let angle: f64 = th.trim().parse().map_err(|_| bad())?;
            if order < 4 || order % 2 == 1 || !(0.0..=20.0).contains(&amp) || !angle.is_finite() {
                return Err(bad());
            }
            cfg.pattern.push((order, amp / 100.0, angle));
        }
        if !(0.0..=20.0).contains(&self.tap_spread) {
            return Err(TonusError::OutOfRange {
                key: "--tap-spread".into(),
                value: self.tap_spread.to_string(),
                why: "choose 0 to 20 dB".into(),
            });
        }
        Ok(())
    }

    /// Synthesises `cfg` (a round when --tap-angles is given) into `output`.
    ///
    /// # Errors
    /// As [`crate::app::commands::synth`].
    pub fn synthesise(
        &self,
        cfg: &crate::physics::synth::SynthConfig,
        output: &Path,
        bits: u16,
        float: bool,
    ) -> Result<Outcome> {
        if self.tap_angles.is_empty() {
            return crate::app::commands::synth(cfg, output, bits, float);
        }
        let x = crate::physics::synth::synthesise_round(cfg, &self.tap_angles, self.tap_spread)?;
        crate::signal::recording::write_wav(output, &x, cfg.sample_rate_hz, bits, float)?;
        Ok(Outcome {
            stdout: format!(
                "{}: {:.2} s at {} Hz, {} taps at {}°, SNR {} dB\n",
                output.display(),
                cfg.duration_s,
                cfg.sample_rate_hz,
                self.tap_angles.len(),
                self.tap_angles
                    .iter()
                    .map(|a| format!("{a}"))
                    .collect::<Vec<_>>()
                    .join(", "),
                cfg.snr_db
            ),
            stderr: String::new(),
            exit: 0,
        })
    }
}
