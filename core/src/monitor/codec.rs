//! [`Walk`](crate::wire::Walk) for the monitor, a child of `monitor` for its private
//! fields; the bytes are postcard's (see [`crate::wire`]). The derived `ladder_config` and
//! `alarm_flags` are not written; a snapshot is decoded into [`Monitor::blank`], whose
//! values there `complete_restored` replaces.

use super::{ConfigError, Monitor, MonitorConfig};
use crate::basis::Basis;
use crate::detect::alarm::AlarmRules;
use crate::detect::cusum::CusumConfig;
use crate::detect::drift::DriftConfig;
use crate::detect::screen::ScreenConfig;
use crate::detect::spread_jump::SpreadJumpConfig;
use crate::detect::DetectConfig;
use crate::fit::FitConfig;
use crate::ladder::{LadderConfig, PowerLadder};
use crate::real::Real;
use crate::spread::SpreadProfile;
use crate::transform::Rung;
use crate::wire::{Transfer, Walk};

/// Why a decoded monitor cannot be used (the snapshot turns it into its own error).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Unusable {
    /// The configuration does not validate.
    Config(ConfigError),
    /// The state disagrees with the configuration (fit sizes, spread settings).
    Inconsistent,
}

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Walk for Monitor<R, P, BINS, Q> {
    /// The monitor's fields in wire order; `ladder_config` and `alarm_flags` are not
    /// visited (derived: decoding leaves them as they are and `complete_restored`
    /// rebuilds both). Out of line: the snapshot's encoder and decoder both call this one
    /// copy.
    #[inline(never)]
    fn walk<'t, 'a>(&mut self, t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
        // Every field named, so a field added to the monitor breaks this build until the
        // walk handles it (compiles to nothing).
        let Monitor {
            config: _,
            ladder_config: _,
            ladder: _,
            spread: _,
            mean_check: _,
            events: _,
            counters: _,
            spread_raised: _,
            last_exponent: _,
            rung_doubted: _,
            detectors: _,
            origin: _,
            alarm_flags: _,
        } = self;
        let t = self.config.walk(t);
        let t = self.ladder.walk(t);
        let t = self.spread.walk(t);
        let t = self.mean_check.walk(t);
        let t = self.events.walk(t);
        let t = self.counters.walk(t);
        let t = self.spread_raised.walk(t);
        let t = self.last_exponent.walk(t);
        let t = self.rung_doubted.walk(t);
        let t = self.detectors.walk(t);
        self.origin.walk(t)
    }
}

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Monitor<R, P, BINS, Q> {
    /// Completes a monitor decoded from a snapshot and checks it: rebuilds what the
    /// snapshot leaves out because the configuration implies it (the ladder settings, every
    /// fit's forgetting and initial variance), then checks that the configuration validates
    /// and the state agrees with it (fit sizes, spread settings), so that `push` keeps its
    /// invariants on it.
    pub(crate) fn complete_restored(&mut self) -> Result<(), Unusable> {
        self.config.validate(P).map_err(Unusable::Config)?;
        self.ladder_config = self.config.ladder();
        self.ladder_config.level_origin = self.origin.value();
        self.ladder.set_fit_config(self.ladder_config.fit);
        let dim = self.config.basis.len();
        let fits_agree = Rung::ALL
            .iter()
            .all(|&rung| self.ladder.fit(rung).dim() == dim);
        if *self.spread.config() != self.config.spread()
            || !fits_agree
            || !self.detectors.alarms.consistent()
        {
            return Err(Unusable::Inconsistent);
        }
        self.alarm_flags = self.detectors.alarms.flags(&self.config.detect.alarms);
        Ok(())
    }

    /// A monitor to decode a snapshot into: every field is overwritten by the walk
    /// ([`Walk`]) or rebuilt by `complete_restored`, so the values here never show. Zeros
    /// (not a usable configuration) are the cheapest to build.
    #[inline(never)]
    pub(crate) fn blank() -> Self {
        let z = R::ZERO;
        let ladder_config = LadderConfig {
            fit: FitConfig {
                forgetting: z,
                initial_variance: z,
            },
            level_origin: z,
            level_scale: z,
            inverse_level_scale: z,
            log_level_scale: z,
            level_floor: z,
            warm_up: 0,
            switch_margin: z,
            switch_hold: 0,
            decide_every: 0,
        };
        let config = MonitorConfig {
            basis: Basis {
                quadratic: false,
                temperature: false,
                reference_scale: z,
                temperature_reference: z,
                temperature_scale: z,
            },
            forgetting: z,
            initial_variance: z,
            level_origin: z,
            find_baseline: false,
            level_low: z,
            level_high: z,
            warm_up: 0,
            switch_margin: z,
            switch_hold: 0,
            initial_rung: Rung::Identity,
            spread_threshold: z,
            spread_every: 0,
            mean_check_after: 0,
            mean_check_min_per_bin: 0,
            mean_check_z: z,
            interval_z: z,
            coverage_factor: z,
            detect: DetectConfig {
                screen: ScreenConfig {
                    raw_low: z,
                    raw_high: z,
                    stuck_run: 0,
                    stuck_window: 0,
                    stuck_response: z,
                    spike_bound: z,
                    spike_run_limit: 0,
                    reference_gap_seconds: 0.0,
                },
                cusum: CusumConfig {
                    reference_value: z,
                    decision_interval: z,
                },
                spread_jump: SpreadJumpConfig {
                    reference_value: z,
                    decision_interval: z,
                },
                drift: DriftConfig {
                    gain_tolerance_percent: z,
                    offset_tolerance: z,
                    wald_quantiles: [z; 4],
                    freeze_after: 0,
                    every: 0,
                },
                alarms: AlarmRules::DEFAULT,
            },
        };
        let ladder = PowerLadder::new(2, &ladder_config, Rung::Identity);
        Monitor::assemble(config, ladder_config, ladder, SpreadProfile::blank())
    }
}
