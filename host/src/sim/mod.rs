//! The virtual node: physics models of source, converter, storage, load and
//! ADC driving the same firmware `Node` a board runs.
//!
//! Every relation is named with its source in the model's module; shapes that
//! are typical rather than published say so.

pub mod judging;
pub mod models;
pub mod run;
pub mod scenarios;

pub use run::engine::VirtualNode;
pub use run::truth::GroundTruth;
pub use scenarios::scenario::Scenario;
