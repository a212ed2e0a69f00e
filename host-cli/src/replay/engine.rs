//! The engine: the monitor with the bookkeeping every command around it needs (event counts
//! by kind and severity, time order, last time, the baseline's origin). `replay`, `watch`
//! and `fleet` all drive it; it writes nothing itself.

use std::collections::BTreeMap;
use std::fmt::Display;

use anyhow::Result;
use steadycal_config::Commissioned;
use steadycal_core::event::{Event, EventKind, Severity};
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::real::Real;
use steadycal_core::sample::{Outcome, Sample};

use crate::baseline::BaselineOrigin;
use crate::replay::time_order::TimeOrder;

/// How serious an event is, for `--fail-on`: the severity the detectors attach, and for
/// the calibration events: `transform_changed`, `spread_tracks_level` and
/// `sample_rejected` are `info`, `mean_misfit` and `rung_in_doubt` are `warn`. `cleared` has
/// none.
pub fn event_severity<R>(kind: &EventKind<R>) -> Option<Severity> {
    match kind {
        EventKind::SpreadTracksLevel { .. }
        | EventKind::TransformChanged { .. }
        | EventKind::SampleRejected { .. } => Some(Severity::Info),
        EventKind::MeanMisfit { .. } | EventKind::RungInDoubt { .. } => Some(Severity::Warn),
        EventKind::BiasShift { severity, .. }
        | EventKind::GainDrift { severity, .. }
        | EventKind::OffsetDrift { severity, .. }
        | EventKind::SpreadJump { severity, .. }
        | EventKind::SignalStuck { severity, .. }
        | EventKind::SignalOutOfRange { severity, .. }
        | EventKind::ReferenceGap { severity, .. } => Some(*severity),
        EventKind::Cleared { .. } => None,
    }
}

/// The monitor with the bookkeeping every command around it needs: event counts by kind
/// and severity, time order, last time. `replay`, `watch` and `fleet` all drive this.
pub struct Engine<R: Real> {
    /// The monitor.
    pub monitor: Monitor<R>,
    /// Events by kind.
    pub counts: BTreeMap<&'static str, u64>,
    /// Events by severity `[info, warn, alarm]`.
    pub raised: [u64; 3],
    /// Time order of the rows.
    pub time_order: TimeOrder,
    /// Time of the last sample.
    pub last_t: f64,
    /// Where the drift test's baseline came from.
    pub baseline: BaselineOrigin,
}

impl<R: Real + Display> Engine<R> {
    /// A fresh engine, starting from the commissioned `baseline` when given; a
    /// configuration the core refuses is an error naming the parameter.
    pub fn new(config: &MonitorConfig<f64>, baseline: Option<&Commissioned>) -> Result<Self> {
        let config: MonitorConfig<R> = config.convert();
        let mut monitor: Monitor<R> = Monitor::new(config).map_err(|error| {
            anyhow::anyhow!("configuration: `{}` is out of range", error.parameter())
        })?;
        let origin = match baseline {
            Some(baseline) => BaselineOrigin::commission(&mut monitor, baseline)?,
            None => BaselineOrigin::Pending,
        };
        let mut engine = Self::with_monitor(monitor);
        engine.baseline = origin;
        Ok(engine)
    }

    /// An engine around an existing monitor (for example one resumed from a snapshot).
    pub fn with_monitor(monitor: Monitor<R>) -> Self {
        Engine {
            counts: EventKind::<R>::NAMES
                .iter()
                .map(|name| (*name, 0))
                .collect(),
            raised: [0; 3],
            time_order: TimeOrder::default(),
            last_t: f64::NAN,
            baseline: BaselineOrigin::resumed(&monitor, None),
            monitor,
        }
    }

    /// Pushes one sample; `on_event` sees every event it raised, in order.
    #[inline]
    pub fn push(
        &mut self,
        sample: &Sample<R>,
        mut on_event: impl FnMut(&Event<R>) -> std::io::Result<()>,
    ) -> std::io::Result<Outcome<R>> {
        self.last_t = sample.t;
        let outcome = self.monitor.push(sample);
        self.baseline.observe(&self.monitor, sample.seq);
        if outcome.new_events > 0 {
            while let Some(event) = self.monitor.pop_event() {
                *self.counts.entry(event.kind.name()).or_insert(0) += 1;
                if let Some(severity) = event_severity(&event.kind) {
                    self.raised[severity as usize] += 1;
                }
                on_event(&event)?;
            }
        }
        Ok(outcome)
    }
}
