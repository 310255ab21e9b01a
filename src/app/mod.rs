//! The command line: clap structs, option checks, the commands, the batch
//! and watch runners and the corpus scorecard. Only `main` sits above it.

pub mod batch;
pub mod cli;
pub mod commands;
pub mod options;
pub mod round;
pub mod round_points;
pub mod scorecard;
