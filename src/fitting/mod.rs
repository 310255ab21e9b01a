//! From partials to a tension: mode labelling, the fits, the biaxial and
//! aspect checks, identifiability, calibration, the uncertainty budget,
//! the grade, and the measurement as named stages. It takes no decision
//! against a specification and writes no file.

pub mod aspect;
pub mod biaxial;
pub mod budget;
pub mod calibration;
pub mod checks;
pub mod diagnosis;
pub mod fit;
pub mod identifiability;
pub mod labelling;
pub mod lines;
pub mod matching;
pub mod measurement;
pub mod model_fit;
pub mod pipeline;
pub mod plate_fit;
pub mod quality;
pub mod refining;
pub mod round;
pub mod round_angle;
pub mod round_points;
pub mod round_taps;
pub mod rows;
pub mod settle;
pub mod taps;
