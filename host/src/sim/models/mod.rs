//! The physics models, one per file: sources (solar cell, primary cell,
//! supercapacitor, thermoelectric generator) and their environment, the
//! converter, the load, the measuring front-end and ADC, and the numeric
//! helpers they share.

pub mod adc;
pub mod cell;
pub mod converter;
pub mod environment;
pub mod load;
pub mod numeric;
pub mod solar;
pub mod source;
pub mod supercap;
pub mod teg;
