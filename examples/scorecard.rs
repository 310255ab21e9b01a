//! Runs `tonus fit`'s code path on every `<id>/rec.wav` of a corpus folder
//! and prints the scorecard (`tonus::scorecard`).
//!
//! `cargo run --release --example scorecard -- [DIR] [--with-tap] [--each] [--json]`
//! (DIR defaults to `../shared/corpus/synthetic`).

use std::path::PathBuf;
use std::process::ExitCode;

fn main() -> ExitCode {
    let mut dir = PathBuf::from("../shared/corpus/synthetic");
    let (mut with_tap, mut each, mut json) = (false, false, false);
    for a in std::env::args().skip(1) {
        match a.as_str() {
            "--with-tap" => with_tap = true,
            "--each" => each = true,
            "--json" => json = true,
            other if other.starts_with("--") => {
                eprintln!("error: unknown option {other}; use --with-tap, --each or --json");
                return ExitCode::from(2);
            }
            other => dir = PathBuf::from(other),
        }
    }
    match tonus::scorecard::run(&dir, with_tap) {
        Ok(card) => {
            if json {
                println!(
                    "{}",
                    serde_json::to_string_pretty(&card).unwrap_or_default()
                );
            } else {
                print!("{}", card.render(each));
            }
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(2)
        }
    }
}
