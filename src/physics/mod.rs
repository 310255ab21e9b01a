//! What a membrane or plate does: Bessel zeros, mode lines, air loading,
//! bending stiffness, evenness splits, panel geometry and the modal
//! synthesis. It never looks at a recording (no import of `signal`).

pub mod airload;
pub mod bessel;
pub mod evenness;
pub mod membrane;
pub mod panel;
pub mod plate;
pub mod synth;
