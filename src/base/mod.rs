//! The ground floor: units, errors, warnings, time, hashing, atomic files,
//! the shared estimate type and the cents constants. It imports nothing
//! of the crate's; everything else may import it.

pub mod error;
pub mod estimate;
pub mod files;
pub mod hash;
pub mod time;
pub mod units;
pub mod warning;
