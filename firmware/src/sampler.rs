//! The sampling trait a board implements for its ADC (embedded-hal 1.0 has none).

use crate::calibration::RawSample;

/// Error classification shared by every sampler, in the embedded-hal style.
pub trait Error: core::fmt::Debug {
    /// What went wrong, in general terms.
    fn kind(&self) -> ErrorKind;
}

/// General kinds of sampling failure.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ErrorKind {
    /// A conversion did not finish in time.
    Timeout,
    /// The ADC or its bus reported a fault.
    Hardware,
    /// Anything else.
    Other,
}

impl Error for core::convert::Infallible {
    fn kind(&self) -> ErrorKind {
        match *self {}
    }
}

/// Declares a sampler's error type.
pub trait ErrorType {
    /// The error a sampling call can return.
    type Error: Error;
}

/// Takes one reading of all four channels as raw ADC counts.
pub trait Sampler: ErrorType {
    /// Converts the four channels, as close together in time as the hardware allows.
    fn sample(&mut self) -> Result<RawSample, Self::Error>;
}
