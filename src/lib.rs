//! tonus: membrane tension from the tap tone.
//!
//! Data flow: [`recording`] reads a WAV file → [`tap`] finds the tap and the
//! span to analyse → [`spectrum`] and [`partials`] measure the partials →
//! [`membrane`] predicts the mode lines → [`matching`] assigns partials to
//! modes → [`fit`] fits the wave speed and tension → [`report`] writes the
//! results. [`synth`] makes test and demo recordings by modal synthesis.

pub mod airload;
pub mod batch;
pub mod bessel;
pub mod biaxial;
pub mod budget;
pub mod calibration;
pub mod cli;
pub mod commands;
pub mod crlb;
pub mod decision;
pub mod error;
pub mod estimator;
pub mod evenness;
pub mod fit;
pub mod history;
pub mod identifiability;
pub mod matching;
pub mod membrane;
pub mod panel;
pub mod partials;
pub mod pipeline;
pub mod plate;
pub mod quality;
pub mod recording;
pub mod report;
pub mod spec;
pub mod spectrum;
pub mod stats;
pub mod synth;
pub mod tap;
pub mod taps;
pub mod units;
pub mod warning;
