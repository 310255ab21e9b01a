//! Throughput and peak memory of `tonus inspect` on a batch of synthetic
//! recordings: 1,000 taps of 1 s at 48 kHz (16-bit), tensions spread
//! around the nominal on both sides of the limits (seeded), decided
//! against a screen specification with no per-recording pictures (inspect
//! draws none; its batch report is written, as in real use).
//!
//! Run: `cargo build --release && cargo run --release --example batch_speed`
//!
//! Two measurements:
//! - **binary**: `target/release/tonus inspect` run as a child process on
//!   the first 250 recordings and then on all 1,000; wall time from spawn
//!   to exit (process start, history, CSV/JSONL and the batch report
//!   included) and the child's own peak resident set from `wait4`'s
//!   rusage (`ru_maxrss`, KiB on Linux). Equal peaks for 250 and 1,000
//!   show that memory does not grow with the count.
//! - **in-process**: `tonus::app::batch::inspect` called from this process,
//!   with the stages timed (read and hash, fit and decide, history
//!   insert, output rewrite, report) and the peak resident set `VmHWM`
//!   from `/proc/self/status`, reset before the run by writing 5 to
//!   `/proc/self/clear_refs`.
//!
//! `-- --peaks-only` times inspect without the damped-sinusoid refinement.
//! `TONUS_BENCH_COUNT=N` changes the 1,000; `TONUS_BENCH_DIR=DIR` keeps
//! the recordings in DIR (and reuses them), for profiling the binary on
//! them (`perf record target/release/tonus inspect … DIR`). Rates depend on the load of
//! the machine: the figures in the README were measured with nothing else
//! running.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;
use tonus::base::units::{KgPerM2, Meters, NewtonsPerMeter};
use tonus::physics::membrane::{Point, Shape};
use tonus::physics::synth::{synthesise, Rng, SynthConfig};
use tonus::signal::recording::write_wav;

/// Nominal tension of the benchmark specification, N/m.
const NOMINAL_N_PER_M: f64 = 2000.0;
/// Standard deviation of the synthetic tensions, N/m: about a tenth of
/// the recordings fall outside the ±200 N/m limits or in their guard band.
const SPREAD_N_PER_M: f64 = 120.0;
/// Recording length, s.
const LENGTH_S: f64 = 1.0;
/// Sample rate, Hz.
const RATE_HZ: u32 = 48_000;

const SPEC: &str = r#"[spec]
name = "bench-screen"
version = "1"
[panel]
shape = "rect"
width = "500mm"
height = "400mm"
areal-density = "40g/m2"
areal-density-u = "0.4g/m2"
tap-at = "0.3,0.35"
model = "isotropic"
[limits]
nominal-tension = "2000N/m"
lower-tension = "1800N/m"
upper-tension = "2200N/m"
[decision]
rule = "guarded"
"#;

fn make_recordings(dir: &Path, count: usize) -> Vec<PathBuf> {
    use rayon::prelude::*;
    let mut rng = Rng::new(20261202);
    let tensions: Vec<f64> = (0..count)
        .map(|_| NOMINAL_N_PER_M + SPREAD_N_PER_M * rng.normal())
        .collect();
    tensions
        .par_iter()
        .enumerate()
        .map(|(i, &t)| {
            let mut cfg = SynthConfig::new(
                Shape::Rectangle {
                    width: Meters(0.5),
                    height: Meters(0.4),
                },
                KgPerM2(0.040),
                NewtonsPerMeter(t),
                Point {
                    u: 0.3,
                    v: Some(0.35),
                },
            );
            cfg.duration_s = LENGTH_S;
            cfg.sample_rate_hz = RATE_HZ;
            cfg.snr_db = 35.0;
            cfg.seed = i as u64 + 1;
            let p = dir.join(format!("tap-{i:04}.wav"));
            if !p.exists() {
                let x = synthesise(&cfg).expect("synthesis");
                write_wav(&p, &x, RATE_HZ, 16, false).expect("write");
            }
            p
        })
        .collect()
}

/// Peak resident set of this process, KiB (`VmHWM`).
fn vm_hwm_kib() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// Resets `VmHWM` to the current resident set (Linux ≥ 4.0).
fn reset_hwm() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

/// User plus system CPU time in a rusage, s.
fn cpu_s(u: &libc::rusage) -> f64 {
    let t = |tv: libc::timeval| tv.tv_sec as f64 + tv.tv_usec as f64 * 1e-6;
    t(u.ru_utime) + t(u.ru_stime)
}

/// CPU time of this process so far, s.
fn self_cpu_s() -> f64 {
    // SAFETY: getrusage fills the zeroed struct for this process.
    let mut u: libc::rusage = unsafe { std::mem::zeroed() };
    unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut u) };
    cpu_s(&u)
}

/// Runs the binary on `files`; returns (seconds, CPU seconds, peak RSS
/// KiB, exit code).
fn run_binary(
    bin: &Path,
    spec: &Path,
    files: &[PathBuf],
    out: &Path,
    mode: &str,
) -> (f64, f64, i64, i32) {
    let _ = std::fs::remove_dir_all(out);
    // The file list goes through a folder of links so the command line
    // stays short whatever the count.
    let folder = out.with_extension("in");
    std::fs::create_dir_all(&folder).expect("input folder");
    for f in files {
        let link = folder.join(f.file_name().expect("name"));
        if !link.exists() {
            std::os::unix::fs::symlink(f, &link).expect("symlink");
        }
    }
    let t0 = Instant::now();
    // Reaped below by wait4, which also gives the child's own rusage;
    // `Child::wait` would not.
    #[allow(clippy::zombie_processes)]
    let child = Command::new(bin)
        .args(["inspect", "--spec"])
        .arg(spec)
        .arg("--out")
        .arg(out)
        .arg("--history")
        .arg(out.join("history.sqlite"))
        .arg(&folder)
        .args(["--refine", refinement_of(mode).name()])
        .stdout(std::process::Stdio::null())
        .spawn()
        .expect("tonus runs");
    let pid = child.id() as libc::pid_t;
    let mut status: libc::c_int = 0;
    // SAFETY: an all-zero rusage is a valid value; wait4 fills it for the
    // child we spawned (and have not waited for elsewhere).
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    let r = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    let secs = t0.elapsed().as_secs_f64();
    assert_eq!(r, pid, "wait4 failed");
    let code = if libc::WIFEXITED(status) {
        libc::WEXITSTATUS(status)
    } else {
        -1
    };
    (secs, cpu_s(&usage), usage.ru_maxrss, code)
}

fn main() {
    // As the tonus binary does.
    tonus::keep_freed_memory();
    let count: usize = std::env::var("TONUS_BENCH_COUNT")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1000);
    let quarter = (count / 4).max(1);
    let dir = tempfile::tempdir().expect("temporary folder");
    let kept = std::env::var_os("TONUS_BENCH_DIR").map(PathBuf::from);
    let d = kept.as_deref().unwrap_or(dir.path());
    std::fs::create_dir_all(d).expect("benchmark folder");
    let t0 = Instant::now();
    let files = make_recordings(d, count);
    println!(
        "made {count} recordings of {LENGTH_S} s at {RATE_HZ} Hz in {:.1} s ({})",
        t0.elapsed().as_secs_f64(),
        d.display()
    );
    let spec_path = d.join("bench.spec.toml");
    std::fs::write(&spec_path, SPEC).expect("spec");
    println!(
        "rayon threads: {} (cores: {})",
        rayon::current_num_threads(),
        std::thread::available_parallelism().map_or(0, |n| n.get())
    );

    // The binary, as a line station runs it.
    let bin = std::env::current_exe()
        .ok()
        .and_then(|p| Some(p.parent()?.parent()?.join("tonus")))
        .filter(|p| p.exists());
    match &bin {
        Some(bin) => {
            println!("\nbinary {}:", bin.display());
            println!(
                "{:>8} {:>10} {:>16} {:>10} {:>18} {:>14} {:>5}",
                "files", "wall [s]", "recordings/s", "CPU [s]", "CPU ms/recording", "peak RSS [MB]", "exit"
            );
            let mode = mode_arg();
            println!("--refine {mode}");
            for (n, label) in [(quarter, "quarter"), (count, "all")] {
                let out = d.join(format!("out-bin-{label}"));
                let (secs, cpu, rss_kib, code) =
                    run_binary(bin, &spec_path, &files[..n], &out, &mode);
                println!(
                    "{:>8} {:>10.2} {:>16.0} {:>10.2} {:>18.2} {:>14.1} {:>5}",
                    n,
                    secs,
                    n as f64 / secs,
                    cpu,
                    1e3 * cpu / n as f64,
                    rss_kib as f64 / 1024.0,
                    code
                );
            }
            // The decisions against those of refining every recording.
            if mode != "always" {
                let out = d.join("out-bin-always");
                let (secs, _, _, _) = run_binary(bin, &spec_path, &files, &out, "always");
                let base = decisions(&out.join("inspect.csv"));
                let this = decisions(&d.join("out-bin-all").join("inspect.csv"));
                let same = base
                    .iter()
                    .zip(&this)
                    .filter(|(a, b)| a.0 == b.0 && a.1 == b.1)
                    .count();
                let refined = this.iter().filter(|r| r.2 == "refined").count();
                println!(
                    "\n--refine {mode}: {refined} of {} recordings refined; decisions equal to --refine always ({:.0} recordings/s) for {same} of {}",
                    this.len(),
                    base.len() as f64 / secs,
                    base.len()
                );
            }
        }
        None => println!(
            "\n(no target/release/tonus beside this example: run `cargo build --release` first for the binary figures)"
        ),
    }

    // In-process, with stage timings.
    let spec = tonus::acceptance::spec::Spec::from_file(&spec_path).expect("spec");
    println!("\nin-process (tonus::app::batch::inspect):");
    println!(
        "{:>8} {:>10} {:>16} {:>10} {:>18} {:>14}",
        "files", "wall [s]", "recordings/s", "CPU [s]", "CPU ms/recording", "VmHWM [MB]"
    );
    let mut last = None;
    for (n, label) in [(quarter, "quarter"), (count, "all")] {
        let out = d.join(format!("out-lib-{label}"));
        let _ = std::fs::remove_dir_all(&out);
        let reset = reset_hwm();
        let cpu0 = self_cpu_s();
        let opts = tonus::app::batch::InspectOptions {
            out: out.clone(),
            history: Some(out.join("history.sqlite")),
            station: None,
            operator: None,
            progress: false,
            refinement: refinement(),
        };
        let t0 = Instant::now();
        let (outcome, timing) =
            tonus::app::batch::inspect_timed(&spec, &files[..n], &opts, &mut |_| {})
                .expect("inspect");
        let secs = t0.elapsed().as_secs_f64();
        let cpu = self_cpu_s() - cpu0;
        let hwm = vm_hwm_kib().map_or(f64::NAN, |k| k as f64 / 1024.0);
        println!(
            "{:>8} {:>10.2} {:>16.0} {:>10.2} {:>18.2} {:>14.1}{}  exit {}",
            n,
            secs,
            n as f64 / secs,
            cpu,
            1e3 * cpu / n as f64,
            hwm,
            if reset { "" } else { " (peak not reset)" },
            outcome.exit
        );
        last = Some((n, timing));
    }
    if let Some((n, t)) = last {
        println!("\nwhere the time goes ({n} recordings; stage seconds summed over threads for the parallel stages):");
        let row = |name: &str, secs: f64| {
            println!(
                "  {name:<30}{secs:>8.2} s  {:>6.2} ms/recording",
                1e3 * secs / n as f64
            )
        };
        row("read + SHA-256 (parallel)", t.read_s);
        row("WAV decode (parallel)", t.decode_s);
        row("measure (parallel)", t.measure_s);
        row("decide + records (parallel)", t.record_s);
        row("history insert (writer)", t.history_s);
        println!("  {:<30}{:>8.2} s", "CSV/JSONL publish (writer)", t.flush_s);
        println!("  {:<30}{:>8.2} s", "batch report", t.report_s);
        println!("  {:<30}{:>8.2} s", "wall", t.wall_s);
    }
    println!(
        "\nThe load average was {} while this ran (2 cores: above 2, other work shared them).",
        std::fs::read_to_string("/proc/loadavg")
            .ok()
            .and_then(|s| s.split_whitespace().next().map(String::from))
            .unwrap_or_else(|| "unknown".into())
    );
}

/// `-- --refine MODE` (always, near-limits, never; `--peaks-only` is
/// never): which recordings inspect refines [default: near-limits].
fn mode_arg() -> String {
    let args: Vec<String> = std::env::args().collect();
    if args.iter().any(|a| a == "--peaks-only") {
        return "never".into();
    }
    args.iter()
        .position(|a| a == "--refine")
        .and_then(|i| args.get(i + 1).cloned())
        .unwrap_or_else(|| "near-limits".into())
}

fn refinement_of(mode: &str) -> tonus::app::options::Refinement {
    tonus::app::options::Refinement::from_name(mode)
        .unwrap_or_else(|| panic!("--refine {mode}: use always, near-limits or never"))
}

fn refinement() -> tonus::app::options::Refinement {
    refinement_of(&mode_arg())
}

/// (file name, decision, frequency method) of every row of an
/// `inspect.csv`.
fn decisions(csv_path: &Path) -> Vec<(String, String, String)> {
    let mut r = csv::Reader::from_path(csv_path).expect("inspect.csv");
    let h = r.headers().expect("header").clone();
    let col = |name: &str| h.iter().position(|x| x == name).expect("column");
    let (f, d, m) = (col("file"), col("decision"), col("frequency_method"));
    let mut v: Vec<(String, String, String)> = r
        .records()
        .map(|rec| {
            let rec = rec.expect("row");
            let name = Path::new(&rec[f])
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            (name, rec[d].to_string(), rec[m].to_string())
        })
        .collect();
    v.sort();
    v
}
