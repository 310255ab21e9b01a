//! The time bound of `tonus fit`, measured per process: the built binary
//! (`target/release/tonus`, build it first) on every recording of the
//! corpus with its inputs, each run timed from spawn to exit, so process
//! start and the Bessel zeros of a circle's lines are included. Prints the
//! slowest runs and how many took more than 0.5 s.
//!
//! `cargo build --release && cargo run --release --example time_bound -- [DIR]`
//! (DIR defaults to `../shared/corpus/synthetic`; `scripts/real-drums.sh`
//! does the same for the real drum samples).

use std::path::PathBuf;
use std::process::{Command, ExitCode, Stdio};
use std::time::Instant;

/// The bound the issue sets for a recording of up to 2 s, seconds.
const BOUND_S: f64 = 0.5;

fn main() -> ExitCode {
    let dir = std::env::args()
        .nth(1)
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from("../shared/corpus/synthetic"));
    let exe = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/release/tonus");
    if !exe.is_file() {
        eprintln!(
            "error: no {}; run cargo build --release first",
            exe.display()
        );
        return ExitCode::from(2);
    }
    let mut cases: Vec<PathBuf> = match std::fs::read_dir(&dir) {
        Ok(rd) => rd
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.join("truth.json").is_file())
            .collect(),
        Err(e) => {
            eprintln!("error: {}: {e}; give the corpus folder", dir.display());
            return ExitCode::from(2);
        }
    };
    cases.sort();
    let mut times: Vec<(f64, String)> = Vec::new();
    for case in &cases {
        let Ok(args) = tonus::app::scorecard::fit_args(case) else {
            eprintln!("skipped {}: unreadable truth.json", case.display());
            continue;
        };
        let start = Instant::now();
        let status = Command::new(&exe)
            .arg("fit")
            .arg(case.join("rec.wav"))
            .args(&args)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .status();
        let s = start.elapsed().as_secs_f64();
        if status.is_err() {
            eprintln!("error: could not run {}", exe.display());
            return ExitCode::from(2);
        }
        times.push((
            s,
            case.file_name()
                .unwrap_or_default()
                .to_string_lossy()
                .into(),
        ));
    }
    times.sort_by(|a, b| b.0.total_cmp(&a.0));
    let over = times.iter().filter(|t| t.0 > BOUND_S).count();
    let median = times.get(times.len() / 2).map_or(0.0, |t| t.0);
    println!(
        "{} recordings, median {:.3} s per process, {} over {BOUND_S} s; slowest:",
        times.len(),
        median,
        over
    );
    for (s, id) in times.iter().take(5) {
        println!("  {s:.3} s  {id}");
    }
    ExitCode::SUCCESS
}
