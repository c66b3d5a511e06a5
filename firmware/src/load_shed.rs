//! Load shedding: an output pin that switches non-essential load off while the
//! supply is at risk, and back on after the supply has been healthy for a while.

use embedded_hal::digital::{ErrorType, OutputPin};
use gleaner_protocol::CutoffState;

/// A pin that does nothing, for nodes without a load switch.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct NoPin;

impl ErrorType for NoPin {
    type Error = core::convert::Infallible;
}

impl OutputPin for NoPin {
    fn set_low(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
}

/// True in the states where non-essential load is shed.
pub const fn sheds_in(state: CutoffState) -> bool {
    matches!(
        state,
        CutoffState::Sagging | CutoffState::CutOff | CutoffState::Stalled
    )
}

/// Drives the load switch: high = load on. Sheds on entering a risky state;
/// restores after `restore_ms` of `Harvesting`.
#[derive(Debug)]
pub struct LoadShedder<P> {
    pin: P,
    shed: bool,
    pin_errors: u32,
}

impl<P: OutputPin> LoadShedder<P> {
    /// Takes the pin and switches the load on.
    pub fn new(pin: P) -> Self {
        let mut shedder = LoadShedder {
            pin,
            shed: true,
            pin_errors: 0,
        };
        shedder.set(false);
        shedder
    }

    /// True while load is shed.
    pub const fn is_shed(&self) -> bool {
        self.shed
    }

    /// Pin writes that failed (the state is retried on the next update).
    pub const fn pin_errors(&self) -> u32 {
        self.pin_errors
    }

    /// Applies the policy for `state`, entered `in_state_ms` ago.
    pub fn update(&mut self, state: CutoffState, in_state_ms: u64, restore_ms: u32) {
        if sheds_in(state) {
            self.set(true);
        } else if state == CutoffState::Harvesting && in_state_ms >= u64::from(restore_ms) {
            self.set(false);
        }
    }

    fn set(&mut self, shed: bool) {
        if shed == self.shed {
            return;
        }
        let result = if shed {
            self.pin.set_low()
        } else {
            self.pin.set_high()
        };
        match result {
            Ok(()) => self.shed = shed,
            Err(_) => self.pin_errors = self.pin_errors.saturating_add(1),
        }
    }

    /// Gives the pin back.
    pub fn release(self) -> P {
        self.pin
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use embedded_hal_mock::eh1::digital::{Mock, State, Transaction};

    #[test]
    fn sheds_on_risk_and_restores_after_the_delay() {
        let expectations = [
            Transaction::set(State::High), // load on at start
            Transaction::set(State::Low),  // shed on Sagging
            Transaction::set(State::High), // restored after 30 s of Harvesting
        ];
        let mut shedder = LoadShedder::new(Mock::new(&expectations));
        assert!(!shedder.is_shed());
        shedder.update(CutoffState::Harvesting, 0, 30_000);
        shedder.update(CutoffState::Sagging, 0, 30_000);
        assert!(shedder.is_shed());
        shedder.update(CutoffState::CutOff, 10, 30_000);
        shedder.update(CutoffState::Harvesting, 29_999, 30_000);
        assert!(shedder.is_shed());
        shedder.update(CutoffState::Harvesting, 30_000, 30_000);
        assert!(!shedder.is_shed());
        shedder.release().done();
    }

    #[test]
    fn a_failing_pin_is_counted_and_retried() {
        use embedded_hal_mock::eh1::MockError;
        let expectations = [
            Transaction::set(State::High),
            Transaction::set(State::Low).with_error(MockError::Io(std::io::ErrorKind::Other)),
            Transaction::set(State::Low),
        ];
        let mut shedder = LoadShedder::new(Mock::new(&expectations));
        shedder.update(CutoffState::CutOff, 0, 1);
        assert_eq!((shedder.is_shed(), shedder.pin_errors()), (false, 1));
        shedder.update(CutoffState::CutOff, 1, 1);
        assert!(shedder.is_shed());
        shedder.release().done();
    }
}
