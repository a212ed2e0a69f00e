//! The figures of a replay run drawn from its checks: residuals and standardized residuals
//! against the fitted level, spread against level, the calibration curve with its band, and
//! gain and offset over time.
//!
//! [`CheckView`] holds what the check figures share: the checks after the warm-up, the level
//! origin, the final rung and which checks are drawn (thinned: extremes per time-and-level
//! cell, an even stride, every check next to an event other than a rejection).

use std::collections::BTreeSet;

use anyhow::Result;
use serde_json::Value;
use steadycal_core::event::KindId;

use super::super::model::{AlarmInterval, RunData};
use super::super::plot::calibration::CalibrationPlot;
use super::super::plot::drift::DriftPlot;
use super::super::plot::residuals::{ResidualPlot, ScatterSeries};
use super::super::plot::spread::SpreadPlot;
use super::super::plot::{short, Dash, Figure};
use super::super::{
    checks, get_f64, plot, rung_lambda, spread_bins, thin, TimeAxis, SCATTER_BINS, SCATTER_SLICES,
    SERIES_BUCKETS,
};

/// The checks of a run as the check figures see them.
pub struct CheckView<'a> {
    run: &'a RunData,
    /// The origin the monitor measured levels from (the sensor's baseline once found); a
    /// summary written before the field existed has the configured one.
    origin: f64,
    warm_up: usize,
    /// The checks after the warm-up.
    checks: Vec<&'a checks::CheckRow>,
    /// Their levels above the origin.
    levels: Vec<f64>,
    /// Their raw residuals.
    residuals: Vec<f64>,
    /// Indices into `checks` of the checks drawn.
    drawn: Vec<usize>,
    /// The rung active at the end of the run.
    pub rung_name: &'a str,
}

impl<'a> CheckView<'a> {
    /// The view of `run`'s checks.
    pub fn new(run: &'a RunData) -> CheckView<'a> {
        let config = &run.config.config;
        let summary = &run.summary;
        let origin = summary["level_origin"]
            .as_f64()
            .unwrap_or(config.level_origin);
        let warm_up = config.warm_up as usize;
        let checks: Vec<&checks::CheckRow> = run.checks.iter().skip(warm_up).collect();
        let seqs: Vec<u64> = checks.iter().map(|c| c.seq).collect();
        let targets = run
            .events
            .iter()
            .filter(|e| e.kind != KindId::SampleRejected.name())
            .map(|e| e.seq);
        let keep = thin::near(&seqs, targets);
        let levels: Vec<f64> = checks.iter().map(|c| c.fitted - origin).collect();
        let log_levels: Vec<f64> = levels
            .iter()
            .map(|&l| if l > 0.0 { l.log10() } else { f64::NAN })
            .collect();
        let residuals: Vec<f64> = checks.iter().map(|c| c.residual).collect();
        let standardized: Vec<f64> = checks
            .iter()
            .map(|c| c.standardized.unwrap_or(f64::NAN))
            .collect();
        let drawn = thin::scatter(
            &log_levels,
            &[&residuals, &standardized],
            SCATTER_SLICES,
            SCATTER_BINS,
            &keep,
        );
        let rung_name = summary
            .get("rung")
            .and_then(Value::as_str)
            .unwrap_or("identity");
        CheckView {
            run,
            origin,
            warm_up,
            checks,
            levels,
            residuals,
            drawn,
            rung_name,
        }
    }

    /// The caution that the check plots are thinned (none when every check is drawn).
    pub fn thinning_caution(&self) -> Option<String> {
        (self.drawn.len() < self.checks.len()).then(|| {
            format!(
                "Plots of checks are thinned: {} of {} checks after the warm-up are drawn (in each of {}×{} time-and-level cells the extremes of the residuals, an even stride of {} checks, and every check next to an event); statistics and bins use every check.",
                self.drawn.len(),
                self.checks.len(),
                SCATTER_SLICES,
                SCATTER_BINS,
                thin::STRIDE_POINTS
            )
        })
    }

    /// The axis label of levels.
    fn level_label(&self) -> String {
        if self.origin == 0.0 {
            "fitted level (raw units, log scale)".to_string()
        } else {
            format!(
                "fitted level above the origin {} (raw units, log scale)",
                short(self.origin)
            )
        }
    }

    /// Raw and standardized residuals against the fitted level, one series per rung (both
    /// drawn with the time ramp).
    pub fn residual_figures(&self) -> Result<Vec<(Figure, bool)>> {
        let (t_first, t_last) = plot::span(self.checks.iter().map(|c| c.t));
        let fraction = |t: f64| {
            if t_last > t_first {
                (t - t_first) / (t_last - t_first)
            } else {
                0.0
            }
        };
        // Series by rung, in order of first appearance.
        let mut rungs: Vec<String> = Vec::new();
        for c in &self.checks {
            if !rungs.contains(&c.rung) {
                rungs.push(c.rung.clone());
            }
        }
        let switches = self
            .run
            .events
            .iter()
            .filter(|e| e.kind == KindId::TransformChanged.name())
            .count();
        let series_of = |value: &dyn Fn(&checks::CheckRow) -> Option<f64>| -> Vec<ScatterSeries> {
            rungs
                .iter()
                .enumerate()
                .map(|(index, rung)| ScatterSeries {
                    name: format!("rung {rung}"),
                    description: format!(
                        "checks while the {rung} rung was active{}",
                        match (rungs.len(), index) {
                            (1, _) => String::new(),
                            (_, 0) => " (before the switch)".into(),
                            _ => " (after a switch)".into(),
                        }
                    ),
                    points: self
                        .drawn
                        .iter()
                        .map(|&i| self.checks[i])
                        .filter(|c| &c.rung == rung)
                        .filter_map(|c| Some((c.fitted - self.origin, value(c)?, fraction(c.t))))
                        .collect(),
                })
                .collect()
        };
        let raw_series = series_of(&|c| Some(c.residual));
        let std_series = series_of(&|c| c.standardized);
        let level_label = self.level_label();
        let warm_up = self.warm_up;
        let switch_note = if switches == 0 {
            "No transform switch happened in this run.".to_string()
        } else {
            format!("{switches} transform switch(es): the marker shape changes with the rung.")
        };
        Ok(vec![
            (
                plot::residuals::plot(&ResidualPlot {
                    id: "residuals",
                    title: "Residuals against fitted level".into(),
                    note: format!(
                        "Raw residual (raw − a-priori prediction of the active rung) of each check after the warm-up ({warm_up} checks), against the predicted level. A fan that widens to the right means the scatter tracks the level. {switch_note}"
                    ),
                    caption: "Raw residuals against fitted level".into(),
                    x_label: level_label.clone(),
                    y_label: "raw residual (raw units)".into(),
                    series: &raw_series,
                    guides: vec![(0.0, Dash::Solid)],
                })?,
                true,
            ),
            (
                plot::residuals::plot(&ResidualPlot {
                    id: "standardized",
                    title: "Standardized residuals against fitted level".into(),
                    note: format!(
                        "The same checks, each residual divided by the active rung's spread model at its level. Under the right rung the band is flat, about ±2 wide (dotted lines) at every level. {switch_note}"
                    ),
                    caption: "Standardized residuals against fitted level".into(),
                    x_label: level_label,
                    y_label: "standardized residual".into(),
                    series: &std_series,
                    guides: vec![(0.0, Dash::Solid), (-2.0, Dash::Dotted), (2.0, Dash::Dotted)],
                })?,
                true,
            ),
        ])
    }

    /// Spread against level over every check after the warm-up, with the monitor's exponent.
    pub fn spread_figure(&self) -> Result<Figure> {
        let config = &self.run.config.config;
        let summary = &self.run.summary;
        let bins = spread_bins(
            &self.levels,
            &self.residuals,
            config.level_low,
            config.level_high,
            16,
        );
        let exponent = get_f64(summary, &["spread_exponent"]).map(|k| {
            (
                k,
                get_f64(summary, &["spread_exponent_se"]).unwrap_or(f64::NAN),
                "the monitor's estimate at the end of the run".to_string(),
            )
        });
        plot::spread::plot(&SpreadPlot {
            bins,
            exponent,
            rung: rung_lambda(self.rung_name).map(|l| (self.rung_name.to_string(), l)),
            x_label: self.level_label(),
        })
    }

    /// The calibration curve over the working range, its band from the final rung's
    /// read-backs.
    pub fn calibration_figure(&self) -> Result<Figure> {
        let config = &self.run.config.config;
        let summary = &self.run.summary;
        let origin = self.origin;
        let rung_name = self.rung_name;
        let offset = get_f64(summary, &["params", "offset"]).unwrap_or(f64::NAN);
        let gain = get_f64(summary, &["params", "gain"]).unwrap_or(f64::NAN);
        let quadratic = get_f64(summary, &["params", "quadratic"]).unwrap_or(0.0);
        let raw_low = origin + config.level_low;
        let raw_high = origin + config.level_high;
        let (r0, r1) = ((raw_low - offset) / gain, (raw_high - offset) / gain);
        let curve: Vec<(f64, f64)> = (0..=64)
            .map(|i| r0 + (r1 - r0) * i as f64 / 64.0)
            .map(|r| (r, offset + gain * r + quadratic * r * r))
            .collect();
        let mut band_bins: Vec<Option<(f64, f64, f64)>> = vec![None; 48];
        let (b0, b1) = (config.level_low.ln(), config.level_high.ln());
        for c in self.run.checks.iter().filter(|c| c.rung == rung_name) {
            if let (Some(value), Some(u)) = (c.value, c.value_u) {
                let level = c.raw - origin;
                if level > 0.0 {
                    let position = (level.ln() - b0) / (b1 - b0) * 48.0;
                    if (0.0..48.0).contains(&position) {
                        band_bins[position as usize] = Some((c.raw, value, u));
                    }
                }
            }
        }
        let band: Vec<(f64, f64, f64)> = band_bins.into_iter().flatten().collect();
        let coverage = config.coverage_factor;
        plot::calibration::plot(&CalibrationPlot {
            points: self
                .drawn
                .iter()
                .map(|&i| (self.checks[i].reference, self.checks[i].raw))
                .collect(),
            points_name: "checks".into(),
            curve,
            band,
            coverage_factor: coverage,
            limits: None,
            x_label: "reference value (reference units)".into(),
            y_label: "raw output (raw units)".into(),
            note: format!(
                "The active calibration at the end of the run (rung {rung_name}) over the working range {}–{} raw units above the origin. The grey band is the expanded uncertainty (k = {}) of a reading: for the most recent check in each of 48 level bins under the final rung, its raw output read back as value ± U, drawn horizontally, in reference units.",
                short(config.level_low),
                short(config.level_high),
                short(coverage)
            ),
        })
    }
}

/// Gain and offset of the active calibration over time (every check, thinned to the
/// extremes of time buckets and the checks next to every alarm), with the baseline's
/// tolerance band and the drift alarms shaded.
pub fn drift_figures(
    run: &RunData,
    alarms: &[AlarmInterval],
    time: &TimeAxis,
) -> Result<Vec<(Figure, bool)>> {
    let config = &run.config.config;
    let summary = &run.summary;
    let warm_up = config.warm_up as usize;
    let all_t: Vec<f64> = run.checks.iter().map(|c| c.t).collect();
    let all_seqs: Vec<u64> = run.checks.iter().map(|c| c.seq).collect();
    let gains: Vec<f64> = run.checks.iter().map(|c| c.gain).collect();
    let offsets: Vec<f64> = run.checks.iter().map(|c| c.offset).collect();
    let alarm_seqs = alarms
        .iter()
        .flat_map(|a| std::iter::once(a.start_seq).chain(a.end_seq));
    let keep_alarms: BTreeSet<usize> = thin::near(&all_seqs, alarm_seqs);
    let kept = thin::series(&all_t, &[&gains, &offsets], SERIES_BUCKETS, &keep_alarms);
    let baseline_offset = get_f64(summary, &["drift", "baseline", "offset"]);
    let baseline_gain = get_f64(summary, &["drift", "baseline", "gain"]);
    let drift = &config.detect.drift;
    let spans = |kind: &str| -> Vec<(f64, f64, String)> {
        alarms
            .iter()
            .filter(|a| a.kind == kind)
            .map(|a| {
                (
                    time.at(a.start_t),
                    time.at(a.end_t),
                    format!("{} ({})", a.kind, a.severity),
                )
            })
            .collect()
    };
    let tolerance_percent = drift.gain_tolerance_percent;
    let mut figures = Vec::new();
    for (id, name, values, uncertainty, baseline, tolerance, kind, unit) in [
        (
            "gain",
            "Gain",
            &gains,
            run.checks.iter().map(|c| c.gain_u).collect::<Vec<f64>>(),
            baseline_gain,
            baseline_gain.map(|g| {
                let d = (g * tolerance_percent / 100.0).abs();
                (
                    g - d,
                    g + d,
                    format!(
                        "tolerance band: baseline ± {} % (detect.drift.gain_tolerance_percent)",
                        short(tolerance_percent)
                    ),
                )
            }),
            KindId::GainDrift.name(),
            "raw units per reference unit",
        ),
        (
            "offset",
            "Offset",
            &offsets,
            run.checks.iter().map(|c| c.offset_u).collect::<Vec<f64>>(),
            baseline_offset,
            baseline_offset.map(|o| {
                let d = drift.offset_tolerance;
                (
                    o - d,
                    o + d,
                    format!(
                        "tolerance band: baseline ± {} raw units (detect.drift.offset_tolerance)",
                        short(d)
                    ),
                )
            }),
            KindId::OffsetDrift.name(),
            "raw units",
        ),
    ] {
        let points: Vec<(f64, f64, f64)> = kept
            .iter()
            .map(|&i| (time.at(all_t[i]), values[i], uncertainty[i]))
            .collect();
        let settled_from = kept.partition_point(|&i| i < warm_up);
        let baseline_note = if baseline.is_some() {
            "The baseline is the commissioned or frozen calibration the drift test compares with."
                .to_string()
        } else {
            "No baseline was set or frozen in this run, so no tolerance band is drawn.".to_string()
        };
        figures.push((
            plot::drift::plot(&DriftPlot {
                id,
                name: name.into(),
                y_label: format!("{} ({unit})", name.to_lowercase()),
                x_label: time.label.clone(),
                points,
                settled_from,
                baseline,
                tolerance,
                alarms: spans(kind),
                note: format!(
                    "{name} of the active calibration after each check (every check, thinned to the first, last, lowest and highest of {SERIES_BUCKETS} time buckets and the checks next to every alarm), with ±2 standard uncertainties; the vertical range is set by the checks after the warm-up (earlier values are drawn clamped to it). {baseline_note} A drift alarm needs a significant Wald test and a change beyond the tolerance; shaded intervals are the {kind} alarms."
                ),
            })?,
            false,
        ));
    }
    Ok(figures)
}
