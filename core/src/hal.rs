//! Alarm output on a digital pin (feature `hal`, embedded-hal 1.0).
//!
//! An [`AlarmOutput`] drives an [`OutputPin`] to its active level while at least one
//! condition of the chosen severity (or worse) is raised, and to the inactive level
//! otherwise. It reads what is raised from the [`Flags`] of each [`Outcome`]: `ALARM` for
//! severity `alarm`, `ALARM` or `WARNING` for `warn` and `info` (the flags carry no info
//! bit, so `info` lights on any raised warning or alarm).
//!
//! # Invariants
//! - After [`AlarmOutput::new`] succeeds the pin is at its inactive level.
//! - The pin is written only when the state changes; a failed write leaves the recorded state
//!   unchanged, so the next update retries it.
//!
//! ```
//! use core::convert::Infallible;
//! use embedded_hal::digital::{ErrorType, OutputPin};
//! use steadycal_core::event::Severity;
//! use steadycal_core::hal::{ActiveLevel, AlarmOutput};
//! use steadycal_core::sample::Flags;
//!
//! struct Led(bool);
//! impl ErrorType for Led { type Error = Infallible; }
//! impl OutputPin for Led {
//!     fn set_low(&mut self) -> Result<(), Infallible> { self.0 = false; Ok(()) }
//!     fn set_high(&mut self) -> Result<(), Infallible> { self.0 = true; Ok(()) }
//! }
//!
//! let mut output = AlarmOutput::new(Led(true), ActiveLevel::High, Severity::Alarm).unwrap();
//! assert!(!output.pin().0);
//! output.update_from_flags(Flags::ALARM).unwrap();
//! assert!(output.pin().0);
//! output.update_from_flags(Flags::empty()).unwrap();
//! assert!(!output.pin().0);
//! ```

use embedded_hal::digital::OutputPin;

use crate::event::Severity;
use crate::sample::{Flags, Outcome};

/// Which electrical level means "alarm raised".
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ActiveLevel {
    /// The pin is high while raised (a LED to ground, a relay driver).
    High,
    /// The pin is low while raised (an open-drain line with a pull-up, a LED to the supply).
    Low,
}

/// A pin that shows whether an alarm of at least a chosen severity is raised.
#[derive(Debug)]
pub struct AlarmOutput<P> {
    pin: P,
    active: ActiveLevel,
    severity: Severity,
    raised: bool,
}

impl<P: OutputPin> AlarmOutput<P> {
    /// Takes the pin and drives it to the inactive level.
    pub fn new(pin: P, active: ActiveLevel, severity: Severity) -> Result<Self, P::Error> {
        let mut output = AlarmOutput {
            pin,
            active,
            severity,
            raised: true,
        };
        output.set(false)?;
        Ok(output)
    }

    /// The severity this output shows.
    pub fn severity(&self) -> Severity {
        self.severity
    }

    /// True while the output is at its active level.
    pub fn is_raised(&self) -> bool {
        self.raised
    }

    /// Drives the pin to the active (`true`) or inactive (`false`) level; writes it only on
    /// a change.
    pub fn set(&mut self, raised: bool) -> Result<(), P::Error> {
        if raised == self.raised {
            return Ok(());
        }
        let high = raised == (self.active == ActiveLevel::High);
        if high {
            self.pin.set_high()?;
        } else {
            self.pin.set_low()?;
        }
        self.raised = raised;
        Ok(())
    }

    /// True when `flags` say a condition of this output's severity (or worse) is raised.
    pub fn wanted(&self, flags: Flags) -> bool {
        match self.severity {
            Severity::Alarm => flags.contains(Flags::ALARM),
            Severity::Warn | Severity::Info => {
                flags.contains(Flags::ALARM) || flags.contains(Flags::WARNING)
            }
        }
    }

    /// Follows the raised conditions reported in `flags`; returns whether the output is
    /// raised afterwards.
    pub fn update_from_flags(&mut self, flags: Flags) -> Result<bool, P::Error> {
        self.set(self.wanted(flags))?;
        Ok(self.raised)
    }

    /// Follows the raised conditions of one push's outcome.
    pub fn update<R>(&mut self, outcome: &Outcome<R>) -> Result<bool, P::Error> {
        self.update_from_flags(outcome.flags)
    }

    /// The pin (for inspection).
    pub fn pin(&self) -> &P {
        &self.pin
    }

    /// Gives the pin back.
    pub fn release(self) -> P {
        self.pin
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use core::convert::Infallible;
    use embedded_hal::digital::ErrorType;

    /// A pin that records its level and the number of writes.
    #[derive(Debug, Default)]
    struct RecordingPin {
        high: bool,
        writes: u32,
    }

    impl ErrorType for RecordingPin {
        type Error = Infallible;
    }

    impl OutputPin for RecordingPin {
        fn set_low(&mut self) -> Result<(), Infallible> {
            self.high = false;
            self.writes += 1;
            Ok(())
        }
        fn set_high(&mut self) -> Result<(), Infallible> {
            self.high = true;
            self.writes += 1;
            Ok(())
        }
    }

    #[test]
    fn active_low_output_is_high_when_quiet_and_low_when_raised() {
        let mut output =
            AlarmOutput::new(RecordingPin::default(), ActiveLevel::Low, Severity::Alarm).unwrap();
        assert!(output.pin().high);
        assert!(output.update_from_flags(Flags::ALARM).unwrap());
        assert!(!output.pin().high);
        assert!(!output.update_from_flags(Flags::WARNING).unwrap());
        assert!(output.pin().high);
    }

    #[test]
    fn warn_output_lights_on_warnings_and_alarms() {
        let mut output =
            AlarmOutput::new(RecordingPin::default(), ActiveLevel::High, Severity::Warn).unwrap();
        assert!(output.update_from_flags(Flags::WARNING).unwrap());
        assert!(output.update_from_flags(Flags::ALARM).unwrap());
        assert!(!output.update_from_flags(Flags::CHECK).unwrap());
    }

    #[test]
    fn pin_is_written_only_on_changes() {
        let mut output =
            AlarmOutput::new(RecordingPin::default(), ActiveLevel::High, Severity::Alarm).unwrap();
        assert_eq!(output.pin().writes, 1);
        for _ in 0..10 {
            output.update_from_flags(Flags::ALARM).unwrap();
        }
        assert_eq!(output.pin().writes, 2);
        let pin = output.release();
        assert!(pin.high);
    }
}
