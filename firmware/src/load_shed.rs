//! Load shedding: an output pin that switches non-essential load off when the
//! load's brown-out is forecast within the horizon, and back on after the
//! forecast has been clear for a while.

use embedded_hal::digital::{ErrorType, OutputPin};

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

/// How close the load is to browning out, from the brown-out forecast.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Risk {
    /// Brown-out forecast within the horizon, or the load already without power.
    Near,
    /// Forecast between one and two horizons away: keep what was decided.
    Watch,
    /// No brown-out in sight, or beyond twice the horizon.
    Clear,
}

impl Risk {
    /// The risk for a forecast and the load's supply.
    pub const fn assess(brownout_in_ms: Option<u32>, load_powered: bool, horizon_ms: u32) -> Risk {
        match brownout_in_ms {
            _ if !load_powered => Risk::Near,
            Some(ms) if ms <= horizon_ms => Risk::Near,
            Some(ms) if ms <= horizon_ms.saturating_mul(2) => Risk::Watch,
            _ => Risk::Clear,
        }
    }
}

/// Drives the load switch: high = load on. Sheds when brown-out is near;
/// restores after it has been clear for the restore time (hysteresis twice:
/// in the forecast's distance and in time).
#[derive(Debug)]
pub struct LoadShedder<P> {
    pin: P,
    shed: bool,
    clear_since_ms: Option<u64>,
    pin_errors: u32,
}

impl<P: OutputPin> LoadShedder<P> {
    /// Takes the pin and switches the load on.
    pub fn new(pin: P) -> Self {
        let mut shedder = LoadShedder {
            pin,
            shed: true,
            clear_since_ms: None,
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

    /// Applies the policy for `risk` at `now_ms`.
    pub fn update(&mut self, risk: Risk, now_ms: u64, restore_ms: u32) {
        match risk {
            Risk::Near => {
                self.clear_since_ms = None;
                self.set(true);
            }
            Risk::Watch => self.clear_since_ms = None,
            Risk::Clear => {
                let since = *self.clear_since_ms.get_or_insert(now_ms);
                if now_ms.saturating_sub(since) >= u64::from(restore_ms) {
                    self.set(false);
                }
            }
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

/// What shedding takes off the load: first the configured shed load, then
/// what the node measures, the load's averaged current just before it sheds
/// less the average once the shed load has been watched for a whole
/// averaging time. The brown-out forecast counts the shedding the node will
/// do with it.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ShedSaving {
    before_na: Option<i64>,
    saving_na: i64,
}

impl ShedSaving {
    /// Starts from the configured shed load (0: not known).
    pub const fn new(configured_na: u32) -> Self {
        ShedSaving {
            before_na: None,
            saving_na: configured_na as i64,
        }
    }

    /// The load is being shed; `load_na` is its averaged current until now,
    /// None when that average does not yet span a whole averaging time (just
    /// after a restore, when one burst of a duty-cycled load can make a few
    /// seconds' mean many times the true one): that shed teaches nothing.
    pub fn on_shed(&mut self, load_na: Option<i64>) {
        self.before_na = load_na;
    }

    /// The load was restored before the shed load's average settled: that
    /// shed teaches nothing.
    pub fn on_restore(&mut self) {
        self.before_na = None;
    }

    /// The shed load's averaged current once it has settled.
    pub fn on_settled(&mut self, shed_load_na: i64) {
        if let Some(before) = self.before_na.take() {
            self.saving_na = before.saturating_sub(shed_load_na).max(0);
        }
    }

    /// Current that shedding saves, nA (0 until learned).
    pub const fn saving_na(&self) -> i64 {
        self.saving_na
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
            Transaction::set(State::Low),  // shed when brown-out is near
            Transaction::set(State::High), // restored after 30 s clear
        ];
        let mut shedder = LoadShedder::new(Mock::new(&expectations));
        let horizon = 60_000;
        assert!(!shedder.is_shed());
        shedder.update(Risk::assess(None, true, horizon), 0, 30_000);
        shedder.update(Risk::assess(Some(horizon), true, horizon), 1_000, 30_000);
        assert!(shedder.is_shed());
        // Between one and two horizons: stays shed, and the clock does not run.
        shedder.update(
            Risk::assess(Some(2 * horizon), true, horizon),
            2_000,
            30_000,
        );
        shedder.update(
            Risk::assess(Some(2 * horizon + 1), true, horizon),
            3_000,
            30_000,
        );
        shedder.update(
            Risk::assess(Some(2 * horizon), true, horizon),
            20_000,
            30_000,
        );
        shedder.update(Risk::assess(None, true, horizon), 21_000, 30_000);
        shedder.update(Risk::assess(None, true, horizon), 50_999, 30_000);
        assert!(shedder.is_shed());
        shedder.update(Risk::assess(None, true, horizon), 51_000, 30_000);
        assert!(!shedder.is_shed());
        shedder.release().done();
    }

    #[test]
    fn an_unpowered_load_counts_as_near() {
        assert_eq!(Risk::assess(None, false, 1), Risk::Near);
        assert_eq!(Risk::assess(Some(u32::MAX), false, 1), Risk::Near);
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
        shedder.update(Risk::Near, 0, 1);
        assert_eq!((shedder.is_shed(), shedder.pin_errors()), (false, 1));
        shedder.update(Risk::Near, 1, 1);
        assert!(shedder.is_shed());
        shedder.release().done();
    }

    #[test]
    fn the_saving_starts_as_configured_and_is_then_measured() {
        let mut saving = ShedSaving::new(40_000);
        assert_eq!(saving.saving_na(), 40_000);
        // 250 µA before the shed, 190 µA once the shed load settled: 60 µA.
        saving.on_shed(Some(250_000));
        saving.on_settled(190_000);
        assert_eq!(saving.saving_na(), 60_000);
        // A shed from an average that had not settled teaches nothing (a
        // burst caught in the seconds after a restore, say).
        saving.on_shed(None);
        saving.on_settled(14_000);
        assert_eq!(saving.saving_na(), 60_000);
        // A shed restored before it settled teaches nothing.
        saving.on_shed(Some(260_000));
        saving.on_restore();
        saving.on_settled(100_000);
        assert_eq!(saving.saving_na(), 60_000);
        // A load that drew more once shed (it woke for other reasons) saves nothing.
        saving.on_shed(Some(100_000));
        saving.on_settled(120_000);
        assert_eq!(saving.saving_na(), 0);
    }
}
