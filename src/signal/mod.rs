//! From a file to measured partials: audio input, the tap, spectra,
//! partial frequencies with their uncertainties and the Cramér–Rao bound.
//! It knows nothing of membranes (no import of `physics`), so what it
//! measures is not bent towards a model.

pub mod crlb;
pub mod estimator;
pub mod partials;
pub mod recording;
pub mod spectrum;
pub mod stream;
pub mod tap;
