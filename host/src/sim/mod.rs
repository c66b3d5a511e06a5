//! The virtual node: physics models of source, converter, storage, load and
//! ADC driving the same firmware `Node` a board runs.
//!
//! Every relation is named with its source in the model's module; shapes that
//! are typical rather than published say so.

pub mod adc;
pub mod bench;
pub mod cell;
pub mod converter;
pub mod corpus;
pub mod engine;
pub mod environment;
pub mod fleet;
pub mod harvest_eval;
pub mod load;
pub mod numeric;
#[cfg(unix)]
pub mod port;
pub mod scenario;
pub mod score;
pub mod solar;
pub mod source;
pub mod supercap;
pub mod synthetic;
pub mod teg;
pub mod truth;

pub use engine::VirtualNode;
pub use scenario::Scenario;
pub use truth::GroundTruth;
