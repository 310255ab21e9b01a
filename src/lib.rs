//! tonus: membrane tension from the tap tone.
//!
//! The crate is built in layers, each a folder that imports only from
//! itself and the layers below (checked by `tests/layers.rs`):
//! [`base`] → [`signal`] and [`physics`] → [`fitting`] → [`acceptance`] →
//! [`report`] → [`app`] → `main`.
//!
//! Data flow: [`signal::recording`] reads the audio → [`signal::tap`]
//! finds the tap and the span to analyse → [`signal::spectrum`] and
//! [`signal::partials`] measure the partials → [`physics::membrane`]
//! predicts the mode lines → [`fitting::matching`] assigns partials to
//! modes → [`fitting::pipeline`] fits the wave speed and tension in named
//! stages → [`acceptance::decision`] decides against a specification →
//! [`report`] writes the results. [`physics::synth`] makes test and demo
//! recordings by modal synthesis.

pub mod acceptance;
pub mod app;
pub mod base;
pub mod fitting;
pub mod physics;
pub mod report;
pub mod signal;

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
