//! The monitored channel: a [`BoardMonitor`] with the compiled-in configuration, or (with
//! the `footprint-baseline` feature) an opaque stand-in with the same interface, so that the
//! size difference of the two builds is the core's share of flash.

use steadycal_core::event::Event;
use steadycal_core::sample::{Outcome, Sample};

/// Fit parameters the board's monitor has room for: exactly what the configured basis needs
/// (two for the default straight line, offset and gain). The host's `Monitor<f32>` has room
/// for three; a fit stores only the parameters it uses, so the two write the same snapshot
/// payload (the header records the capacity). A board with a quadratic or temperature term
/// has three and carries the general fit code (firmware/README.md, "Footprint", has both
/// figures).
#[cfg(not(feature = "footprint-baseline"))]
pub const PARAMETERS: usize = crate::config::PARAMETERS;

/// The monitor type this board runs.
#[cfg(not(feature = "footprint-baseline"))]
pub type BoardMonitor = steadycal_core::monitor::Monitor<f32, PARAMETERS>;

#[cfg(not(feature = "footprint-baseline"))]
mod real {
    use super::BoardMonitor;
    use super::*;
    use steadycal_core::monitor::{Counters, Monitor};
    use steadycal_core::transform::Rung;

    /// One monitor.
    pub struct Channel {
        monitor: BoardMonitor,
    }

    impl Channel {
        /// `size_of::<BoardMonitor>()`.
        pub const MONITOR_BYTES: usize = core::mem::size_of::<BoardMonitor>();

        /// The compiled-in configuration and baseline ([`crate::config`]). build.rs
        /// validated both on the host and fails the build naming the key, so the board's
        /// message does not name it (the names of `ConfigError::parameter` and the code
        /// that picks one take about 920 B of its flash).
        pub fn new() -> Result<Channel, &'static str> {
            let mut monitor = Monitor::new(crate::config::MONITOR_CONFIG)
                .map_err(|_| "monitor: configuration refused (build.rs names the key)")?;
            if let Some(baseline) = crate::config::BASELINE {
                monitor
                    .set_baseline(baseline.parameters, Some(baseline.covariance))
                    .map_err(|_| "monitor: baseline refused (build.rs checks it)")?;
            }
            Ok(Channel { monitor })
        }
        pub fn push(&mut self, sample: &Sample<f32>) -> Outcome<f32> {
            self.monitor.push(sample)
        }
        /// The monitor (for the snapshot store, whose save takes it by `&mut` without
        /// changing it, and for the restore check after the feed).
        pub fn monitor_mut(&mut self) -> &mut BoardMonitor {
            &mut self.monitor
        }
        pub fn pop_event(&mut self) -> Option<Event<f32>> {
            self.monitor.pop_event()
        }
        pub fn counters(&self) -> Counters {
            self.monitor.counters()
        }
        pub fn parameters(&self) -> [f32; 4] {
            self.monitor.parameters()
        }
        pub fn rung(&self) -> Rung {
            self.monitor.rung()
        }
        pub fn events_dropped(&self) -> u32 {
            self.monitor.events_dropped()
        }
    }
}

#[cfg(feature = "footprint-baseline")]
mod real {
    use super::*;
    use core::hint::black_box;
    use steadycal_core::monitor::Counters;
    use steadycal_core::transform::Rung;

    /// Opaque stand-in: every value comes through `black_box`, so the firmware around it
    /// (feed reading, event lines, summary) stays in the build.
    pub struct Channel;

    impl Channel {
        pub const MONITOR_BYTES: usize = 0;
        pub fn new() -> Result<Channel, &'static str> {
            Ok(Channel)
        }
        pub fn push(&mut self, sample: &Sample<f32>) -> Outcome<f32> {
            black_box(sample);
            black_box(Outcome {
                detail: steadycal_core::sample::Detail::Nothing,
                flags: Default::default(),
                new_events: 0,
            })
        }
        pub fn pop_event(&mut self) -> Option<Event<f32>> {
            black_box(None)
        }
        pub fn counters(&self) -> Counters {
            black_box(Counters::default())
        }
        pub fn parameters(&self) -> [f32; 4] {
            black_box([0.0; 4])
        }
        pub fn rung(&self) -> Rung {
            black_box(Rung::Identity)
        }
        pub fn events_dropped(&self) -> u32 {
            black_box(0)
        }
    }
}

pub use real::Channel;
