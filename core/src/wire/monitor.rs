//! [`Wire`] for the monitor: a child of `monitor` for its private fields; the bytes are
//! postcard's (see [`crate::wire`]). The derived `ladder_config` is not written; decoding
//! puts a placeholder there, which `complete_restored` replaces; so are the derived
//! `alarm_flags`.

use super::{unset_ladder_config, Counters, Monitor, MonitorConfig};
use crate::adequacy::MeanCheck;
use crate::basis::Basis;
use crate::detect::alarm::AlarmRules;
use crate::detect::cusum::CusumConfig;
use crate::detect::drift::DriftConfig;
use crate::detect::screen::ScreenConfig;
use crate::detect::spread_jump::SpreadJumpConfig;
use crate::detect::{DetectConfig, Detectors};
use crate::event::EventQueue;
use crate::fit::FitConfig;
use crate::ladder::{LadderConfig, PowerLadder};
use crate::real::Real;
use crate::spread::SpreadProfile;
use crate::transform::Rung;
use crate::wire::{Reader, Wire, Writer};

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Wire for Monitor<R, P, BINS, Q> {
    fn put(&self, w: &mut Writer<'_>) {
        self.config.put(w);
        self.ladder.put(w);
        self.spread.put(w);
        self.mean_check.put(w);
        self.events.put(w);
        self.counters.put(w);
        self.spread_raised.put(w);
        self.last_exponent.put(w);
        self.detectors.put(w);
    }

    fn get(r: &mut Reader<'_>) -> Self {
        Monitor {
            config: Wire::get(r),
            ladder_config: unset_ladder_config(),
            ladder: Wire::get(r),
            spread: Wire::get(r),
            mean_check: Wire::get(r),
            events: Wire::get(r),
            counters: Wire::get(r),
            spread_raised: Wire::get(r),
            last_exponent: Wire::get(r),
            detectors: Wire::get(r),
            alarm_flags: crate::sample::Flags::empty(),
        }
    }
    /// In place; `ladder_config` and `alarm_flags` are left as they are (derived:
    /// `complete_restored` rebuilds both).
    fn read(&mut self, r: &mut Reader<'_>) {
        self.config.read(r);
        self.ladder.read(r);
        self.spread.read(r);
        self.mean_check.read(r);
        self.events.read(r);
        self.counters.read(r);
        self.spread_raised.read(r);
        self.last_exponent.read(r);
        self.detectors.read(r);
    }
}

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Monitor<R, P, BINS, Q> {
    /// A monitor to decode a snapshot into: every field is overwritten by [`Wire::read`]
    /// or rebuilt by `complete_restored`, so the values here never show. Zeros (not a
    /// usable configuration) are the cheapest to build.
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
        Monitor {
            config: MonitorConfig {
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
            },
            ladder_config,
            ladder: PowerLadder::new(2, &ladder_config, Rung::Identity),
            spread: SpreadProfile::blank(),
            mean_check: MeanCheck::new(),
            events: EventQueue::new(),
            counters: Counters::default(),
            spread_raised: false,
            last_exponent: None,
            detectors: Detectors::new(),
            alarm_flags: crate::sample::Flags::empty(),
        }
    }
}
