//! Runs `tonus fit`'s code path on every `<id>/rec.wav` of a corpus folder
//! and prints the scorecard (`tonus::app::scorecard`).
//!
//! `cargo run --release --example scorecard -- [DIR] [--with-tap] [--each] [--json]
//! [--scale-width F] [--scale-height F]` (the entered sides multiplied by F,
//! as if measured wrong)
//! (DIR defaults to `../shared/corpus/synthetic`).

use std::path::PathBuf;
use std::process::ExitCode;

fn main() -> ExitCode {
    let mut dir = PathBuf::from("../shared/corpus/synthetic");
    let (mut with_tap, mut each, mut json) = (false, false, false);
    let mut scale = (1.0, 1.0);
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--scale-width" | "--scale-height" => {
                let Some(v) = args.next().and_then(|v| v.parse::<f64>().ok()) else {
                    eprintln!("error: {a} needs a factor, e.g. {a} 1.04");
                    return ExitCode::from(2);
                };
                if a == "--scale-width" {
                    scale.0 = v;
                } else {
                    scale.1 = v;
                }
            }
            "--with-tap" => with_tap = true,
            "--each" => each = true,
            "--json" => json = true,
            other if other.starts_with("--") => {
                eprintln!("error: unknown option {other}; use --with-tap, --each, --json, --scale-width F or --scale-height F");
                return ExitCode::from(2);
            }
            other => dir = PathBuf::from(other),
        }
    }
    match tonus::app::scorecard::run_scaled(&dir, with_tap, scale) {
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
