//! The load's own supply: whether it has power, and why it lost it.
//!
//! The load browns out when the output (storage) voltage falls below its
//! minimum supply voltage and starts again at its restart voltage, a little
//! higher (hysteresis, as a microcontroller's brown-out reset does). Each
//! change is reported once, with the cause read from the converter's state at
//! that moment.

use gleaner_protocol::{ConverterState, LoadCause, Thresholds};

/// Whether the load has power.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct LoadWatch {
    powered: bool,
}

/// Why the load lost its supply, from the converter's state at the time.
pub const fn cause_of_brownout(converter: ConverterState) -> LoadCause {
    match converter {
        ConverterState::Idle | ConverterState::CutOff => LoadCause::InputCutOff,
        ConverterState::Stalled => LoadCause::ConverterFault,
        ConverterState::ColdStart | ConverterState::Harvesting | ConverterState::Sagging => {
            LoadCause::LoadTooHeavy
        }
    }
}

impl LoadWatch {
    /// Unpowered until the supply first reaches the restart voltage.
    pub const fn new() -> Self {
        LoadWatch { powered: false }
    }

    /// True while the load has power.
    pub const fn is_powered(&self) -> bool {
        self.powered
    }

    /// Looks at one output voltage; returns the change, if any, with its cause.
    pub fn update(
        &mut self,
        output_uv: u32,
        converter: ConverterState,
        t: &Thresholds,
    ) -> Option<(bool, LoadCause)> {
        if self.powered && output_uv < t.load_min_uv {
            self.powered = false;
            Some((false, cause_of_brownout(converter)))
        } else if !self.powered && output_uv >= t.load_restart_uv {
            self.powered = true;
            Some((true, LoadCause::SupplyRestored))
        } else {
            None
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::DEFAULT_THRESHOLDS;

    #[test]
    fn browns_out_below_the_minimum_and_restarts_above_the_restart_voltage() {
        let t = DEFAULT_THRESHOLDS;
        let mut watch = LoadWatch::new();
        assert_eq!(
            watch.update(t.load_min_uv + 1, ConverterState::Harvesting, &t),
            None
        );
        assert_eq!(
            watch.update(t.load_restart_uv, ConverterState::Harvesting, &t),
            Some((true, LoadCause::SupplyRestored))
        );
        // Between the two: no change either way (hysteresis).
        assert_eq!(
            watch.update(t.load_min_uv, ConverterState::CutOff, &t),
            None
        );
        assert_eq!(
            watch.update(t.load_min_uv - 1, ConverterState::CutOff, &t),
            Some((false, LoadCause::InputCutOff))
        );
        assert!(!watch.is_powered());
        assert_eq!(
            watch.update(t.load_restart_uv - 1, ConverterState::Harvesting, &t),
            None
        );
    }

    #[test]
    fn the_cause_follows_the_converter() {
        assert_eq!(
            cause_of_brownout(ConverterState::CutOff),
            LoadCause::InputCutOff
        );
        assert_eq!(
            cause_of_brownout(ConverterState::Idle),
            LoadCause::InputCutOff
        );
        assert_eq!(
            cause_of_brownout(ConverterState::Stalled),
            LoadCause::ConverterFault
        );
        assert_eq!(
            cause_of_brownout(ConverterState::Harvesting),
            LoadCause::LoadTooHeavy
        );
        assert_eq!(
            cause_of_brownout(ConverterState::Sagging),
            LoadCause::LoadTooHeavy
        );
    }
}
