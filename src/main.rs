//! The `tonus` binary: parses arguments, calls one library function per
//! subcommand, prints the result or the error on one line, sets the exit
//! status (0 done, 1 fit doubtful/unfit or a demo file failed, 2 error).

use clap::Parser;
use std::process::ExitCode;
use tonus::app::cli::{Cli, Command};
use tonus::app::commands::{self, Outcome};
use tonus::app::options;
use tonus::base::error::Result;

fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Partials {
            recording,
            input,
            json,
        } => commands::partials(&recording, input.channel()?, &input.analysis()?, json),
        Command::Fit {
            recording,
            panel,
            input,
            free_aspect,
            model,
            tension_unit,
            json,
            out,
            no_picture,
            calibration,
        } => commands::fit(
            &recording,
            input.channel()?,
            &panel.to_panel()?,
            &tonus::fitting::measurement::FitOptions {
                calibration: calibration
                    .as_deref()
                    .map(options::load_calibration)
                    .transpose()?
                    .map(std::sync::Arc::new),
                // A calibration replaces the panel file's model; only a
                // --model flag given with it is refused.
                ..options::fit_options(
                    free_aspect,
                    model.as_deref().or(if calibration.is_none() {
                        panel.to_spec()?.model
                    } else {
                        None
                    }
                    .as_deref()),
                    &input,
                )?
            },
            &commands::OutputOptions {
                unit: options::tension_unit(&tension_unit)?,
                as_json: json,
                out,
                picture: !no_picture,
            },
        ),
        Command::Modes {
            panel,
            tension,
            fundamental,
            count,
            tension_unit,
            json,
        } => commands::modes(
            &panel.to_panel()?,
            tension.as_deref(),
            fundamental.as_deref(),
            count,
            options::tension_unit(&tension_unit)?,
            json,
        ),
        Command::Synth {
            panel,
            tension,
            output,
            snr,
            t60,
            tap_duration,
            length,
            pre_roll,
            rate,
            bits,
            hum,
            hum_level,
            extra_tone,
            taps,
            tap_interval,
            gain,
            seed,
            air,
            tension_y,
            bending_stiffness,
            tension_skew,
        } => {
            let cfg = options::synth_config(
                &panel,
                &tension,
                snr,
                t60.as_deref(),
                tap_duration.as_deref(),
                length.as_deref(),
                pre_roll.as_deref(),
                rate,
                hum.as_deref(),
                hum_level,
                &extra_tone,
                taps,
                tap_interval.as_deref(),
                gain,
                seed,
                air,
                tension_y.as_deref(),
                bending_stiffness,
                tension_skew.as_deref(),
            )?;
            let (b, float) = options::sample_format(&bits)?;
            commands::synth(&cfg, &output, b, float)
        }
        Command::Calibrate {
            recordings,
            panel,
            input,
            tension,
            tension_u,
            model,
            out,
        } => {
            let (opts, t, u) =
                options::calibrate_options(model.as_deref(), &tension, &tension_u, &input)?;
            commands::calibrate(
                &recordings,
                input.channel()?,
                &panel.to_panel()?,
                &opts,
                (t, u),
                &out,
            )
        }
        Command::Demo { recordings, out } => commands::demo(&recordings, &out),
        Command::Inspect {
            spec,
            inputs,
            watch,
            watch_interval,
            watch_limit,
            watch_timeout,
            out,
            history,
            no_history,
            station,
            operator,
            refine,
            peaks_only,
        } => {
            let spec = tonus::acceptance::spec::Spec::from_file(&spec)?;
            // Ctrl-C and SIGTERM finish the recordings in flight and write
            // the outputs and the report.
            tonus::app::batch::stop_on_signals()?;
            let opts = tonus::app::batch::InspectOptions {
                out,
                history: (!no_history).then_some(history),
                station,
                operator,
                progress: true,
                refinement: options::refinement(&refine, peaks_only)?,
            };
            match watch {
                Some(dir) => tonus::app::batch::watch(
                    &spec,
                    &opts,
                    &options::watch_options(
                        dir,
                        watch_interval.as_deref(),
                        watch_limit,
                        watch_timeout.as_deref(),
                    )?,
                    &mut print_line,
                    &mut |l| eprintln!("{l}"),
                ),
                None => tonus::app::batch::inspect(
                    &spec,
                    &tonus::app::batch::expand_inputs(&inputs)?,
                    &opts,
                    &mut print_line,
                ),
            }
        }
        Command::History {
            db,
            spec,
            since,
            until,
            decision,
            csv,
        } => {
            let filter = tonus::acceptance::history::Filter {
                spec_name: spec,
                since: since
                    .map(|t| tonus::base::time::UtcTime::parse("--since", &t))
                    .transpose()?,
                until: until
                    .map(|t| tonus::base::time::UtcTime::parse("--until", &t))
                    .transpose()?,
                decision,
            };
            commands::history(&db, &filter, csv.as_deref())
        }
    }
}

/// Prints one line on standard output as soon as it is ready (a line
/// station reads them one by one); a closed pipe is not an error here.
fn print_line(line: &str) {
    use std::io::Write as _;
    let mut out = std::io::stdout().lock();
    let _ = writeln!(out, "{line}");
    let _ = out.flush();
}

fn main() -> ExitCode {
    tonus::keep_freed_memory();
    let cli = Cli::parse();
    match run(cli) {
        Ok(o) => {
            print!("{}", o.stdout);
            eprint!("{}", o.stderr);
            ExitCode::from(o.exit)
        }
        Err(e) => {
            eprintln!("tonus: {e}");
            ExitCode::from(2)
        }
    }
}
