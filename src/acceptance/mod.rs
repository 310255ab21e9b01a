//! From a measurement to a decision and a record: the specification,
//! decision rules, process statistics and the history store. It never
//! formats a report.

pub mod decision;
pub mod history;
pub mod lug_advice;
pub mod spec;
pub mod stats;
