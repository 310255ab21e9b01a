//! tonus: membrane tension from the tap tone.
//!
//! Data flow: [`recording`] reads a WAV file → [`tap`] finds the tap and the
//! span to analyse → [`spectrum`] and [`partials`] measure the partials →
//! [`membrane`] predicts the mode lines → [`matching`] assigns partials to
//! modes → [`fit`] fits the wave speed and tension → [`report`] writes the
//! results. [`synth`] makes test and demo recordings by modal synthesis.

pub mod airload;
pub mod aspect;
pub mod batch;
pub mod bessel;
pub mod biaxial;
pub mod budget;
pub mod calibration;
pub mod cli;
pub mod commands;
pub mod crlb;
pub mod decision;
pub mod diagnosis;
pub mod error;
pub mod estimator;
pub mod evenness;
pub mod fit;
pub mod history;
pub mod identifiability;
pub mod lug_advice;
pub mod matching;
pub mod membrane;
pub mod panel;
pub mod partials;
pub mod pipeline;
pub mod plate;
pub mod quality;
pub mod recording;
pub mod report;
pub mod round;
pub mod round_cmd;
pub mod round_png;
pub mod round_report;
pub mod scorecard;
pub mod spec;
pub mod spectrum;
pub mod stats;
pub mod stream;
pub mod synth;
pub mod tap;
pub mod taps;
pub mod units;
pub mod warning;

/// Keeps freed memory in the process, for a program that analyses many
/// recordings: by default glibc hands large buffers (every recording's
/// spectra) back to the kernel and takes them again as fresh zeroed
/// pages, which cost about a tenth of a batch's time in page faults.
/// With this, blocks up to 32 MiB come from the heap and the heap is
/// trimmed only above 128 MiB free. Call it first in `main`, before any
/// thread is started.
pub fn keep_freed_memory() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: mallopt only sets allocator parameters and is called
    // before other threads exist.
    unsafe {
        libc::mallopt(libc::M_MMAP_THRESHOLD, 32 << 20);
        libc::mallopt(libc::M_TRIM_THRESHOLD, 128 << 20);
    }
}
