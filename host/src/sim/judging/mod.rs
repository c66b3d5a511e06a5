//! Judging the node against the truth: forecast scores over the corpus
//! and the harvest predictors on a year of irradiance.

pub mod harvest_eval;
pub mod score;
