//! `[detect]`: the detector settings, grouped as the core groups them
//! ([`DetectConfig`]): `[detect.screen]`, `[detect.cusum]`, `[detect.spread_jump]`,
//! `[detect.drift]` and one table per alarm kind under `[detect.alarms]`.
//!
//! Two settings may be given in the engineer's terms instead of the core's:
//! - the CUSUM's decision interval h from a false-alarm budget, `in_control_run_length`
//!   (checks) or `in_control_time` with `checks_per_hour`, sized by [`crate::arl`];
//! - the drift test's χ² quantiles from `alpha` (`χ²_p(1 − α)` for p = 1..4, statrs).
//!
//! Giving two forms of one setting is an error naming the second.

use serde::{Deserialize, Serialize};
use statrs::distribution::{ChiSquared, ContinuousCDF};
use steadycal_core::detect::alarm::AlarmRule;
use steadycal_core::detect::DetectConfig;

use crate::arl;
use crate::error::Problem;
use crate::values::Alpha;
use crate::values::{
    AtLeastOne, AtLeastTwo, Duration, Finite, Fraction, NonNegative, Positive, PositiveOrOff,
    RunLength, SeverityName,
};

/// `[detect.screen]`: checks on every sample.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ScreenSection {
    /// Lowest physically possible raw value (default `origin − range.high`).
    pub raw_low: Option<Finite>,
    /// Highest physically possible raw value (default `origin + 2·range.high`).
    pub raw_high: Option<Finite>,
    /// Identical raw values in a row that make the signal stuck (default 50).
    pub stuck_run: Option<AtLeastTwo>,
    /// Checks per window of the no-response test, 0 = off (default 32).
    pub stuck_window: Option<u32>,
    /// The no-response test fires below this fraction of the predicted range (default 0.01).
    pub stuck_response: Option<Fraction>,
    /// Spike bound on |standardized residual|, `inf` = off (default 6).
    pub spike_bound: Option<PositiveOrOff>,
    /// Spikes in a row accepted as a change (default 3).
    pub spike_run_limit: Option<AtLeastOne>,
    /// Seconds without a check that make a reference gap, `inf` = off (default 86400).
    pub reference_gap_seconds: Option<PositiveOrOff>,
}

/// `[detect.cusum]`: the two-sided tabular CUSUM on standardized residuals.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct CusumSection {
    /// Reference value k, σ units (default 0.5).
    pub reference_value: Option<NonNegative>,
    /// Decision interval h, σ units (default 5).
    pub decision_interval: Option<Positive>,
    /// In-control average run length in checks; sets h (instead of `decision_interval`).
    pub in_control_run_length: Option<RunLength>,
    /// In-control average run length as a duration; sets h with `checks_per_hour`.
    pub in_control_time: Option<Duration>,
    /// Checks per hour expected in the field (with `in_control_time`).
    pub checks_per_hour: Option<Positive>,
}

/// `[detect.spread_jump]`: the one-sided CUSUM on standardized `ln z²`.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct SpreadJumpSection {
    /// Reference value, standardized units (default 0.3).
    pub reference_value: Option<NonNegative>,
    /// Decision interval, standardized units (default 8).
    pub decision_interval: Option<Positive>,
}

/// `[detect.drift]`: the calibration against its baseline.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct DriftSection {
    /// Gain tolerance, percent of the baseline gain (default 1).
    pub gain_tolerance_percent: Option<NonNegative>,
    /// Offset tolerance, raw units (default `range.low`).
    pub offset_tolerance: Option<NonNegative>,
    /// α of the Wald test: quantiles χ²_p(1 − α), p = 1..4 (default 0.001).
    pub alpha: Option<Alpha>,
    /// The four quantiles themselves (instead of `alpha`).
    pub wald_quantiles: Option<[Positive; 4]>,
    /// Checks after the warm-up at which a baseline is frozen when none is commissioned
    /// (default 1000).
    pub freeze_after: Option<u32>,
    /// Evaluate every this many checks (default 16).
    pub every: Option<AtLeastOne>,
}

/// One alarm kind's rule.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct AlarmSection {
    /// Severity of the raised alarm.
    pub severity: Option<SeverityName>,
    /// Present observations of one episode needed to raise.
    pub raise_after: Option<AtLeastOne>,
    /// Absent observations in a row that clear.
    pub clear_after: Option<AtLeastOne>,
}

/// `[detect.alarms.KIND]`: raise and clear rules, one table per detector alarm.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct AlarmsSection {
    /// `bias_shift` (observations: checks; present: a CUSUM signal).
    #[serde(default)]
    pub bias_shift: AlarmSection,
    /// `gain_drift` (observations: drift evaluations).
    #[serde(default)]
    pub gain_drift: AlarmSection,
    /// `offset_drift` (observations: drift evaluations).
    #[serde(default)]
    pub offset_drift: AlarmSection,
    /// `spread_jump` (observations: checks; present: a spread CUSUM signal).
    #[serde(default)]
    pub spread_jump: AlarmSection,
    /// `signal_stuck` (observations: samples).
    #[serde(default)]
    pub signal_stuck: AlarmSection,
    /// `signal_out_of_range` (observations: samples).
    #[serde(default)]
    pub signal_out_of_range: AlarmSection,
    /// `reference_gap` (observations: samples).
    #[serde(default)]
    pub reference_gap: AlarmSection,
}

/// `[detect]`.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct DetectSection {
    /// `[detect.screen]`.
    #[serde(default)]
    pub screen: ScreenSection,
    /// `[detect.cusum]`.
    #[serde(default)]
    pub cusum: CusumSection,
    /// `[detect.spread_jump]`.
    #[serde(default)]
    pub spread_jump: SpreadJumpSection,
    /// `[detect.drift]`.
    #[serde(default)]
    pub drift: DriftSection,
    /// `[detect.alarms.KIND]`.
    #[serde(default)]
    pub alarms: AlarmsSection,
}

/// How the CUSUM's decision interval was set.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "from")]
pub enum CusumSizing {
    /// The default or `decision_interval`.
    DecisionInterval,
    /// From `in_control_run_length` (or `in_control_time` × `checks_per_hour`), in checks.
    RunLength {
        /// The run length asked for, in checks.
        checks: f64,
    },
}

/// χ²_p upper quantiles `χ²_p(1 − α)` for p = 1..4.
pub fn chi_squared_quantiles(alpha: f64) -> [f64; 4] {
    [1.0, 2.0, 3.0, 4.0].map(|dof| {
        ChiSquared::new(dof)
            .map(|d| d.inverse_cdf(1.0 - alpha))
            .unwrap_or(f64::NAN)
    })
}

fn set<T: Copy, V>(target: &mut T, value: Option<V>, map: impl Fn(V) -> T) {
    if let Some(value) = value {
        *target = map(value);
    }
}

impl DetectSection {
    /// Overrides the detector defaults `config` (built for the working range) with every
    /// key given; returns how h was set.
    pub(crate) fn apply(&self, config: &mut DetectConfig<f64>) -> Result<CusumSizing, Problem> {
        let screen = &self.screen;
        let s = &mut config.screen;
        set(&mut s.raw_low, screen.raw_low, |v| v.0);
        set(&mut s.raw_high, screen.raw_high, |v| v.0);
        set(&mut s.stuck_run, screen.stuck_run, |v| v.0);
        set(&mut s.stuck_window, screen.stuck_window, |v| v);
        set(&mut s.stuck_response, screen.stuck_response, |v| v.0);
        set(&mut s.spike_bound, screen.spike_bound, |v| v.0);
        set(&mut s.spike_run_limit, screen.spike_run_limit, |v| v.0);
        set(
            &mut s.reference_gap_seconds,
            screen.reference_gap_seconds,
            |v| v.0,
        );
        if s.raw_low >= s.raw_high {
            return Err(Problem::new(
                "detect.screen.raw_low",
                format!(
                    "must be below `detect.screen.raw_high` ({} ≥ {})",
                    s.raw_low, s.raw_high
                ),
            ));
        }

        let jump = &self.spread_jump;
        set(
            &mut config.spread_jump.reference_value,
            jump.reference_value,
            |v| v.0,
        );
        set(
            &mut config.spread_jump.decision_interval,
            jump.decision_interval,
            |v| v.0,
        );

        let drift = &self.drift;
        let d = &mut config.drift;
        set(
            &mut d.gain_tolerance_percent,
            drift.gain_tolerance_percent,
            |v| v.0,
        );
        set(&mut d.offset_tolerance, drift.offset_tolerance, |v| v.0);
        Problem::exclusive(
            ("detect.drift.alpha", drift.alpha.is_some()),
            (
                "detect.drift.wald_quantiles",
                drift.wald_quantiles.is_some(),
            ),
        )?;
        set(&mut d.wald_quantiles, drift.alpha, |a| {
            chi_squared_quantiles(a.0)
        });
        set(&mut d.wald_quantiles, drift.wald_quantiles, |q| {
            q.map(|v| v.0)
        });
        set(&mut d.freeze_after, drift.freeze_after, |v| v);
        set(&mut d.every, drift.every, |v| v.0);

        let alarms = &self.alarms;
        let rules = &mut config.alarms;
        for (section, rule) in [
            (&alarms.bias_shift, &mut rules.bias_shift),
            (&alarms.gain_drift, &mut rules.gain_drift),
            (&alarms.offset_drift, &mut rules.offset_drift),
            (&alarms.spread_jump, &mut rules.spread_jump),
            (&alarms.signal_stuck, &mut rules.signal_stuck),
            (&alarms.signal_out_of_range, &mut rules.signal_out_of_range),
            (&alarms.reference_gap, &mut rules.reference_gap),
        ] {
            section.apply(rule);
        }

        self.cusum.apply(config)
    }

    /// Fills every key not given with the value in force in `config` (the written file
    /// is complete); a setting given in the engineer's terms keeps that form.
    pub(crate) fn complete(&mut self, config: &DetectConfig<f64>) {
        let s = &config.screen;
        let screen = &mut self.screen;
        screen.raw_low.get_or_insert(Finite(s.raw_low));
        screen.raw_high.get_or_insert(Finite(s.raw_high));
        screen.stuck_run.get_or_insert(AtLeastTwo(s.stuck_run));
        screen.stuck_window.get_or_insert(s.stuck_window);
        screen
            .stuck_response
            .get_or_insert(Fraction(s.stuck_response));
        screen
            .spike_bound
            .get_or_insert(PositiveOrOff(s.spike_bound));
        screen
            .spike_run_limit
            .get_or_insert(AtLeastOne(s.spike_run_limit));
        screen
            .reference_gap_seconds
            .get_or_insert(PositiveOrOff(s.reference_gap_seconds));
        let cusum = &mut self.cusum;
        cusum
            .reference_value
            .get_or_insert(NonNegative(config.cusum.reference_value));
        if cusum.in_control_run_length.is_none() && cusum.in_control_time.is_none() {
            cusum
                .decision_interval
                .get_or_insert(Positive(config.cusum.decision_interval));
        }
        let jump = &mut self.spread_jump;
        jump.reference_value
            .get_or_insert(NonNegative(config.spread_jump.reference_value));
        jump.decision_interval
            .get_or_insert(Positive(config.spread_jump.decision_interval));
        let d = &config.drift;
        let drift = &mut self.drift;
        drift
            .gain_tolerance_percent
            .get_or_insert(NonNegative(d.gain_tolerance_percent));
        drift
            .offset_tolerance
            .get_or_insert(NonNegative(d.offset_tolerance));
        if drift.alpha.is_none() {
            drift
                .wald_quantiles
                .get_or_insert(d.wald_quantiles.map(Positive));
        }
        drift.freeze_after.get_or_insert(d.freeze_after);
        drift.every.get_or_insert(AtLeastOne(d.every));
        let alarms = &mut self.alarms;
        let rules = &config.alarms;
        for (section, rule) in [
            (&mut alarms.bias_shift, &rules.bias_shift),
            (&mut alarms.gain_drift, &rules.gain_drift),
            (&mut alarms.offset_drift, &rules.offset_drift),
            (&mut alarms.spread_jump, &rules.spread_jump),
            (&mut alarms.signal_stuck, &rules.signal_stuck),
            (&mut alarms.signal_out_of_range, &rules.signal_out_of_range),
            (&mut alarms.reference_gap, &rules.reference_gap),
        ] {
            section
                .severity
                .get_or_insert(SeverityName::of(rule.severity));
            section
                .raise_after
                .get_or_insert(AtLeastOne(rule.raise_after));
            section
                .clear_after
                .get_or_insert(AtLeastOne(rule.clear_after));
        }
    }
}

impl AlarmSection {
    fn apply(&self, rule: &mut AlarmRule) {
        set(&mut rule.severity, self.severity, |v| v.severity());
        set(&mut rule.raise_after, self.raise_after, |v| v.0);
        set(&mut rule.clear_after, self.clear_after, |v| v.0);
    }
}

impl CusumSection {
    /// The in-control run length asked for, in checks, if any.
    fn run_length(&self) -> Result<Option<f64>, Problem> {
        Problem::exclusive(
            (
                "detect.cusum.in_control_run_length",
                self.in_control_run_length.is_some(),
            ),
            (
                "detect.cusum.in_control_time",
                self.in_control_time.is_some(),
            ),
        )?;
        match (&self.in_control_time, self.checks_per_hour) {
            (Some(time), Some(rate)) => Ok(Some(time.hours * rate.0)),
            (Some(_), None) => Err(Problem::new(
                "detect.cusum.in_control_time",
                "needs `detect.cusum.checks_per_hour`, the check rate expected in the field",
            )),
            (None, Some(_)) => Err(Problem::new(
                "detect.cusum.checks_per_hour",
                "is used only with `detect.cusum.in_control_time`",
            )),
            (None, None) => Ok(self.in_control_run_length.map(|n| n.0)),
        }
    }

    fn apply(&self, config: &mut DetectConfig<f64>) -> Result<CusumSizing, Problem> {
        set(
            &mut config.cusum.reference_value,
            self.reference_value,
            |v| v.0,
        );
        let Some(checks) = self.run_length()? else {
            set(
                &mut config.cusum.decision_interval,
                self.decision_interval,
                |v| v.0,
            );
            return Ok(CusumSizing::DecisionInterval);
        };
        let form = if self.in_control_time.is_some() {
            "detect.cusum.in_control_time"
        } else {
            "detect.cusum.in_control_run_length"
        };
        Problem::exclusive(
            (
                "detect.cusum.decision_interval",
                self.decision_interval.is_some(),
            ),
            (form, true),
        )?;
        let h = arl::decision_interval(config.cusum.reference_value, checks)
            .map_err(|error| Problem::new(form, error.to_string()))?;
        config.cusum.decision_interval = h;
        Ok(CusumSizing::RunLength { checks })
    }
}
