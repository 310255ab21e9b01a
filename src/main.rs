//! The `tonus` binary: parses arguments, calls one library function per
//! subcommand, prints the result or the error on one line, sets the exit
//! status (0 done, 1 fit doubtful/unfit or a demo file failed, 2 error).

use clap::Parser;
use std::process::ExitCode;
use tonus::acceptance::history::Filter;
use tonus::acceptance::spec::Spec;
use tonus::app::cli::{Cli, Command, FitArgs, HistoryArgs, InspectArgs, SynthArgs};
use tonus::app::commands::{self, Outcome};
use tonus::app::{batch, options};
use tonus::base::error::Result;
use tonus::base::time::UtcTime;
use tonus::fitting::measurement::FitOptions;

fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Partials(a) => commands::partials(
            &a.recording,
            a.input.channel()?,
            &a.input.analysis()?,
            a.json,
        ),
        Command::Fit(a) => fit(a),
        Command::Modes(a) => commands::modes(
            &a.panel.to_panel()?,
            a.tension.as_deref(),
            a.fundamental.as_deref(),
            a.count,
            options::tension_unit(&a.tension_unit)?,
            a.json,
        ),
        Command::Synth(a) => synth(a),
        Command::Calibrate(a) => {
            let (opts, t, u) =
                options::calibrate_options(a.model.as_deref(), &a.tension, &a.tension_u, &a.input)?;
            let panel = a.panel.to_panel()?;
            commands::calibrate(
                &a.recordings,
                a.input.channel()?,
                &panel,
                &opts,
                (t, u),
                &a.out,
            )
        }
        Command::Demo(a) => commands::demo(&a.recordings, &a.out),
        Command::Inspect(a) => inspect(a),
        Command::History(a) => history(a),
        Command::Round(a) => tonus::app::round::run(&a, &mut print_line),
    }
}

/// `tonus fit`: a calibration replaces the panel file's model; only a
/// --model flag given with it is refused.
fn fit(a: FitArgs) -> Result<Outcome> {
    let panel_model = match a.calibration {
        None => a.panel.to_spec()?.model,
        Some(_) => None,
    };
    let model = a.model.as_deref().or(panel_model.as_deref());
    let opts = FitOptions {
        calibration: a
            .calibration
            .as_deref()
            .map(options::load_calibration)
            .transpose()?
            .map(std::sync::Arc::new),
        ..options::fit_options(a.free_aspect, model, &a.input)?
    };
    let output = commands::OutputOptions {
        unit: options::tension_unit(&a.tension_unit)?,
        as_json: a.json,
        out: a.out,
        picture: !a.no_picture,
    };
    commands::fit(
        &a.recording,
        a.input.channel()?,
        &a.panel.to_panel()?,
        &opts,
        &output,
    )
}

/// `tonus synth`.
fn synth(a: SynthArgs) -> Result<Outcome> {
    let cfg = options::synth_config(
        &a.panel,
        &a.tension,
        a.snr,
        a.t60.as_deref(),
        a.tap_duration.as_deref(),
        a.length.as_deref(),
        a.pre_roll.as_deref(),
        a.rate,
        a.hum.as_deref(),
        a.hum_level,
        &a.extra_tone,
        a.taps,
        a.tap_interval.as_deref(),
        a.gain,
        a.seed,
        a.air,
        a.tension_y.as_deref(),
        a.bending_stiffness,
        a.tension_skew.as_deref(),
    )?;
    let mut cfg = cfg;
    a.round.apply(&mut cfg)?;
    let (bits, float) = options::sample_format(&a.bits)?;
    a.round.synthesise(&cfg, &a.output, bits, float)
}

/// `tonus inspect`: a batch of files, or a watched folder.
fn inspect(a: InspectArgs) -> Result<Outcome> {
    let spec = Spec::from_file(&a.spec)?;
    // Ctrl-C and SIGTERM finish the recordings in flight and write the
    // outputs and the report.
    batch::stop_on_signals()?;
    let opts = batch::InspectOptions {
        out: a.out,
        history: (!a.no_history).then_some(a.history),
        station: a.station,
        operator: a.operator,
        progress: true,
        refinement: options::refinement(&a.refine, a.peaks_only)?,
    };
    match a.watch {
        Some(dir) => {
            let watch = options::watch_options(
                dir,
                a.watch_interval.as_deref(),
                a.watch_limit,
                a.watch_timeout.as_deref(),
            )?;
            batch::watch(&spec, &opts, &watch, &mut print_line, &mut |l| {
                eprintln!("{l}")
            })
        }
        None => {
            let files = batch::expand_inputs(&a.inputs)?;
            batch::inspect(&spec, &files, &opts, &mut print_line)
        }
    }
}

/// `tonus history`.
fn history(a: HistoryArgs) -> Result<Outcome> {
    let filter = Filter {
        spec_name: a.spec,
        since: a.since.map(|t| UtcTime::parse("--since", &t)).transpose()?,
        until: a.until.map(|t| UtcTime::parse("--until", &t)).transpose()?,
        decision: a.decision,
    };
    commands::history(&a.db, &filter, a.csv.as_deref())
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
