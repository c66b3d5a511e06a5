//! Running a virtual node: the engine that steps the models and the
//! firmware `Node`, the ground truth it keeps, the pseudo-terminal it is
//! served on, and the virtual bench.

pub mod bench;
pub mod engine;
#[cfg(unix)]
pub mod port;
pub mod truth;
