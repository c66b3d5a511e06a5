//! What a virtual node runs: scenarios (built-in and from files), the
//! randomized scoring corpus, invented fleets, and invented long logs.

pub mod corpus;
pub mod fleet;
pub mod scenario;
pub mod synthetic;
