//! `steadycal report`: one self-contained HTML page (inline SVG, no scripts, no network)
//! with the plots an engineer reads first, for a replay run or a lab assessment.
//!
//! - [`checks`]: the per-check table `replay --checks` writes and the report reads,
//! - [`model`]: the run read from files (summary, events, checks, config), alarm intervals,
//! - [`thin`]: thinning of long runs (extremes and points near events kept),
//! - [`plot`]: one module per plot (plotters, SVG backend, built-in text metrics),
//! - [`html`]: page assembly, [`escape`]: escaping of every outside string,
//! - [`run_report`] and [`assess_report`]: what goes on the page for each kind of input.
//!
//! # Contract
//! - The page depends only on its inputs: two reports of the same run are byte-identical.
//! - Every plot is an `<svg data-plot="ID">` whose series are `<g class="series"
//!   data-series="NAME" data-points="N">`; the tests read these.
//! - Every page carries the caution that the tool supports, and does not replace,
//!   calibration under the applicable standards, local codes and licensed practice.

pub mod checks;
pub mod escape;
pub mod html;
pub mod model;
pub mod plot;
pub mod thin;

use std::collections::BTreeSet;

use anyhow::Result;
use serde_json::Value;

use crate::assess::{self, Assessment, CalibrationData};
use model::RunData;
use plot::calibration::CalibrationPlot;
use plot::drift::DriftPlot;
use plot::residuals::{ResidualPlot, ScatterSeries};
use plot::spread::{SpreadBin, SpreadPlot};
use plot::timeline::TimelinePlot;
use plot::{short, Dash, Figure};

/// The cautions every report starts its list with.
pub fn base_cautions() -> Vec<String> {
    vec![
        "steadycal supports, and does not replace, calibration under the applicable standards, local codes and licensed practice. An alarm cleared by the tool, or a report made with it, is not a certified calibration.".into(),
        "Readings can feed decisions about safety (gas detection, structural loads): act on them only within the procedures of the site.".into(),
    ]
}

/// How times are shown: offset from the first time, in a unit that suits the span.
#[derive(Clone, Debug)]
pub struct TimeAxis {
    /// The first time, seconds.
    pub t0: f64,
    /// Seconds per display unit.
    pub unit: f64,
    /// The axis label.
    pub label: String,
}

impl TimeAxis {
    /// A time axis for times in `[t0, t1]` seconds.
    pub fn new(t0: f64, t1: f64) -> TimeAxis {
        let t0 = if t0.is_finite() { t0 } else { 0.0 };
        let span = if t1.is_finite() { t1 - t0 } else { 0.0 };
        let (unit, name) = if span <= 300.0 {
            (1.0, "s")
        } else if span <= 3.0 * 3600.0 {
            (60.0, "min")
        } else if span <= 4.0 * 86_400.0 {
            (3600.0, "h")
        } else {
            (86_400.0, "d")
        };
        let origin = if t0 > 1e8 {
            time::OffsetDateTime::from_unix_timestamp(t0.floor() as i64)
                .ok()
                .and_then(|t| {
                    t.format(&time::format_description::well_known::Rfc3339)
                        .ok()
                })
                .unwrap_or_else(|| format!("t = {t0} s"))
        } else {
            format!("t = {} s", short(t0))
        };
        TimeAxis {
            t0,
            unit,
            label: format!("time since {origin} ({name})"),
        }
    }
    /// A time in display units.
    pub fn at(&self, t: f64) -> f64 {
        (t - self.t0) / self.unit
    }
}

fn get_f64(value: &Value, path: &[&str]) -> Option<f64> {
    let mut v = value;
    for key in path {
        v = v.get(*key)?;
    }
    v.as_f64()
}

fn display(value: &Value) -> String {
    match value {
        Value::Null => "-".into(),
        Value::String(s) => s.clone(),
        Value::Number(n) => n.as_f64().map(short).unwrap_or_else(|| n.to_string()),
        other => other.to_string(),
    }
}

/// λ of a rung name.
pub fn rung_lambda(name: &str) -> Option<f64> {
    steadycal_core::transform::Rung::from_name(name).map(|r| r.lambda::<f64>())
}

/// Residual SDs in `bins` log-spaced level bins over `[low, high]` (Welford per bin;
/// standard error of an SD from n residuals ≈ SD/√(2(n − 1)), the normal-theory
/// approximation, from memory). Bins with fewer than 3 residuals are left out.
pub fn spread_bins(
    levels: &[f64],
    residuals: &[f64],
    low: f64,
    high: f64,
    bins: usize,
) -> Vec<SpreadBin> {
    let (l0, l1) = (low.ln(), high.ln());
    let mut acc = vec![(0.0f64, 0.0f64, 0.0f64, 0.0f64); bins]; // n, mean, m2, sum ln level
    for (&level, &residual) in levels.iter().zip(residuals) {
        if !(level > 0.0 && residual.is_finite()) {
            continue;
        }
        let position = (level.ln() - l0) / (l1 - l0) * bins as f64;
        if !(0.0..bins as f64).contains(&position) {
            continue;
        }
        let a = &mut acc[position as usize];
        a.0 += 1.0;
        let delta = residual - a.1;
        a.1 += delta / a.0;
        a.2 += delta * (residual - a.1);
        a.3 += level.ln();
    }
    acc.into_iter()
        .filter(|a| a.0 >= 3.0)
        .map(|(n, _, m2, sum_ln)| {
            let sd = (m2 / (n - 1.0)).sqrt();
            SpreadBin {
                level: (sum_ln / n).exp(),
                sd,
                se: sd / (2.0 * (n - 1.0)).sqrt(),
                count: n,
            }
        })
        .collect()
}

/// Scatter cells of the residual plots: time slices × level bins.
pub const SCATTER_SLICES: usize = 4;
/// Level bins of the residual plots' thinning grid.
pub const SCATTER_BINS: usize = 30;
/// Time buckets of the parameter plots' thinning.
pub const SERIES_BUCKETS: usize = 600;
/// Most rows listed in the events table.
pub const EVENT_ROWS: usize = 400;

/// The report page of a replay run.
pub fn run_report(run: &RunData) -> Result<String> {
    let config = &run.config.config;
    let summary = &run.summary;
    // The origin the monitor measured levels from (the sensor's baseline once found); a
    // summary written before the field existed has the configured one.
    let origin = summary["level_origin"]
        .as_f64()
        .unwrap_or(config.level_origin);
    let warm_up = config.warm_up as usize;
    let checks: Vec<&checks::CheckRow> = run.checks.iter().skip(warm_up).collect();
    let alarms = run.alarms();
    let time = TimeAxis::new(run.first_t(), run.last_t());
    let mut cautions = base_cautions();

    // Which checks are drawn: extremes per cell, and the checks next to every event other
    // than single rejections.
    let seqs: Vec<u64> = checks.iter().map(|c| c.seq).collect();
    let targets = run
        .events
        .iter()
        .filter(|e| e.kind != "sample_rejected")
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
    if drawn.len() < checks.len() {
        cautions.push(format!(
            "Plots of checks are thinned: {} of {} checks after the warm-up are drawn (in each of {}×{} time-and-level cells the extremes of the residuals, an even stride of {} checks, and every check next to an event); statistics and bins use every check.",
            drawn.len(),
            checks.len(),
            SCATTER_SLICES,
            SCATTER_BINS,
            thin::STRIDE_POINTS
        ));
    }
    let (t_first, t_last) = plot::span(checks.iter().map(|c| c.t));
    let fraction = |t: f64| {
        if t_last > t_first {
            (t - t_first) / (t_last - t_first)
        } else {
            0.0
        }
    };
    // Series by rung, in order of first appearance.
    let mut rungs: Vec<String> = Vec::new();
    for c in &checks {
        if !rungs.contains(&c.rung) {
            rungs.push(c.rung.clone());
        }
    }
    let switches = run
        .events
        .iter()
        .filter(|e| e.kind == "transform_changed")
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
                points: drawn
                    .iter()
                    .map(|&i| checks[i])
                    .filter(|c| &c.rung == rung)
                    .filter_map(|c| Some((c.fitted - origin, value(c)?, fraction(c.t))))
                    .collect(),
            })
            .collect()
    };
    let raw_series = series_of(&|c| Some(c.residual));
    let std_series = series_of(&|c| c.standardized);
    let level_label = if origin == 0.0 {
        "fitted level (raw units, log scale)".to_string()
    } else {
        format!(
            "fitted level above the origin {} (raw units, log scale)",
            short(origin)
        )
    };
    let switch_note = if switches == 0 {
        "No transform switch happened in this run.".to_string()
    } else {
        format!("{switches} transform switch(es): the marker shape changes with the rung.")
    };
    let mut figures: Vec<(Figure, bool)> = Vec::new();
    figures.push((
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
    ));
    figures.push((
        plot::residuals::plot(&ResidualPlot {
            id: "standardized",
            title: "Standardized residuals against fitted level".into(),
            note: format!(
                "The same checks, each residual divided by the active rung's spread model at its level. Under the right rung the band is flat, about ±2 wide (dotted lines) at every level. {switch_note}"
            ),
            caption: "Standardized residuals against fitted level".into(),
            x_label: level_label.clone(),
            y_label: "standardized residual".into(),
            series: &std_series,
            guides: vec![(0.0, Dash::Solid), (-2.0, Dash::Dotted), (2.0, Dash::Dotted)],
        })?,
        true,
    ));

    // Spread against level (every check after the warm-up).
    let rung_name = summary
        .get("rung")
        .and_then(Value::as_str)
        .unwrap_or("identity");
    let bins = spread_bins(&levels, &residuals, config.level_low, config.level_high, 16);
    let exponent = get_f64(summary, &["spread_exponent"]).map(|k| {
        (
            k,
            get_f64(summary, &["spread_exponent_se"]).unwrap_or(f64::NAN),
            "the monitor's estimate at the end of the run".to_string(),
        )
    });
    figures.push((
        plot::spread::plot(&SpreadPlot {
            bins,
            exponent,
            rung: rung_lambda(rung_name).map(|l| (rung_name.to_string(), l)),
            x_label: level_label.clone(),
        })?,
        false,
    ));

    // Calibration curve over the working range, band from the final rung's read-backs.
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
    for c in run.checks.iter().filter(|c| c.rung == rung_name) {
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
    figures.push((
        plot::calibration::plot(&CalibrationPlot {
            points: drawn.iter().map(|&i| (checks[i].reference, checks[i].raw)).collect(),
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
        })?,
        false,
    ));

    // Gain and offset over time.
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
            "gain_drift",
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
            "offset_drift",
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

    // Timeline.
    let mut rows: Vec<String> = Vec::new();
    let order = model::alarm_kinds().chain(["transform_changed", "mean_misfit", "sample_rejected"]);
    for kind in order {
        let present = run
            .events
            .iter()
            .any(|e| e.kind == kind || (e.kind == "cleared" && e.alarm.as_deref() == Some(kind)));
        if present {
            rows.push(kind.to_string());
        }
    }
    let row_of = |kind: &str| rows.iter().position(|r| r == kind);
    let mut raises = Vec::new();
    let mut clears = Vec::new();
    let mut others = Vec::new();
    let mut last_rejection_bucket: Option<i64> = None;
    let (s0, s1) = (time.at(run.first_t()), time.at(run.last_t()));
    let bucket_width = ((s1 - s0) / 600.0).max(f64::MIN_POSITIVE);
    let mut rejections_thinned = 0usize;
    for event in &run.events {
        let t = time.at(event.t);
        if event.kind == "cleared" {
            if let Some(row) = event.alarm.as_deref().and_then(row_of) {
                clears.push((row, t));
            }
        } else if event.raises_alarm() {
            if let Some(row) = row_of(&event.kind) {
                raises.push((row, t));
            }
        } else if let Some(row) = row_of(&event.kind) {
            if event.kind == "sample_rejected" {
                let bucket = ((t - s0) / bucket_width).floor() as i64;
                if last_rejection_bucket == Some(bucket) {
                    rejections_thinned += 1;
                    continue;
                }
                last_rejection_bucket = Some(bucket);
            }
            others.push((row, t));
        }
    }
    let intervals = alarms
        .iter()
        .filter_map(|a| Some((row_of(&a.kind)?, time.at(a.start_t), time.at(a.end_t))))
        .collect();
    let mut timeline_note = String::from("Every alarm raise and clear is drawn.");
    if rejections_thinned > 0 {
        timeline_note.push_str(&format!(
            " Rejected samples are drawn once per 1/600 of the run ({rejections_thinned} more are counted in the summary)."
        ));
    }
    figures.push((
        plot::timeline::plot(&TimelinePlot {
            rows,
            intervals,
            raises,
            clears,
            others,
            x_label: time.label.clone(),
            span: (s0, s1),
            note: timeline_note,
        })?,
        false,
    ));

    // Tables.
    let mut summary_rows: Vec<(String, String)> = Vec::new();
    for key in [
        "feed",
        "precision",
        "samples",
        "checks",
        "readings",
        "rejected",
        "below_origin",
        "provisional_readings",
        "level_origin",
        "level_origin_source",
        "rung",
        "spread_exponent",
        "spread_exponent_se",
        "koenker_statistic",
        "residual_sd",
        "events_dropped",
        "rows_skipped",
        "stopped_at",
    ] {
        if let Some(value) = summary.get(key) {
            summary_rows.push((key.to_string(), display(value)));
        }
    }
    if let Some(Value::Object(params)) = summary.get("params") {
        for (key, value) in params {
            summary_rows.push((format!("params.{key}"), display(value)));
        }
    }
    if let Some(Value::Object(drift)) = summary.get("drift") {
        for (key, value) in drift {
            summary_rows.push((format!("drift.{key}"), display(value)));
        }
    }
    if let Some(Value::Object(raised)) = summary.get("raised") {
        let text = raised
            .iter()
            .map(|(k, v)| format!("{k} {}", display(v)))
            .collect::<Vec<_>>()
            .join(", ");
        summary_rows.push(("raised (events by severity)".into(), text));
    }
    if let Some(Value::Object(events)) = summary.get("events") {
        let text = events
            .iter()
            .filter(|(_, v)| v.as_u64().unwrap_or(0) > 0)
            .map(|(k, v)| format!("{k} ×{}", display(v)))
            .collect::<Vec<_>>()
            .join(", ");
        summary_rows.push((
            "events".into(),
            if text.is_empty() { "none".into() } else { text },
        ));
    }
    if let Some(Value::Array(list)) = summary.get("alarms") {
        let text = list
            .iter()
            .map(|a| {
                format!(
                    "{} ({})",
                    a.get("kind").map(display).unwrap_or_default(),
                    a.get("severity").map(display).unwrap_or_default()
                )
            })
            .collect::<Vec<_>>()
            .join(", ");
        summary_rows.push((
            "alarms raised at the end".into(),
            if text.is_empty() { "none".into() } else { text },
        ));
    }
    let alarm_rows: Vec<Vec<String>> = alarms
        .iter()
        .map(|a| {
            vec![
                a.kind.clone(),
                a.severity.clone(),
                short(a.start_t),
                a.end_seq
                    .map(|_| short(a.end_t))
                    .unwrap_or_else(|| "still raised at the end".into()),
                a.start_seq.to_string(),
            ]
        })
        .collect();
    let listed: Vec<&model::EventRow> = run
        .events
        .iter()
        .filter(|e| e.kind != "sample_rejected")
        .collect();
    let event_rows: Vec<Vec<String>> = listed
        .iter()
        .take(EVENT_ROWS)
        .map(|e| {
            vec![
                e.seq.to_string(),
                short(e.t),
                e.kind.clone(),
                e.severity.clone().unwrap_or_else(|| "-".into()),
                e.detail.clone(),
            ]
        })
        .collect();
    let rejected = run.events.len() - listed.len();
    let mut events_body = html::table(
        "alarm-intervals",
        &[
            "alarm",
            "severity",
            "raised at t (s)",
            "cleared at t (s)",
            "raised at seq",
        ],
        &alarm_rows,
    );
    events_body.push_str(&html::table(
        "events",
        &["seq", "t (s)", "kind", "severity", "details"],
        &event_rows,
    ));
    let mut event_note = format!("{} events in the run; {rejected} sample rejections are counted in the summary and not listed.", run.events.len());
    if listed.len() > EVENT_ROWS {
        event_note.push_str(&format!(
            " The first {EVENT_ROWS} of {} other events are listed.",
            listed.len()
        ));
    }
    events_body.push_str(&format!("<p>{}</p>\n", escape::escape(&event_note)));

    let config_rows = vec![
        ("source".to_string(), run.config.source.clone()),
        ("range.origin".into(), short(config.level_origin)),
        ("range.low".into(), short(config.level_low)),
        ("range.high".into(), short(config.level_high)),
        ("fit.forgetting".into(), short(config.forgetting)),
        ("fit.warm_up".into(), config.warm_up.to_string()),
        (
            "ladder.initial_rung".into(),
            config.initial_rung.name().to_string(),
        ),
        ("ladder.switch_margin".into(), short(config.switch_margin)),
        ("ladder.switch_hold".into(), config.switch_hold.to_string()),
        ("spread.threshold".into(), short(config.spread_threshold)),
        (
            "readings.coverage_factor".into(),
            short(config.coverage_factor),
        ),
        (
            "detect.drift.gain_tolerance_percent".into(),
            short(drift.gain_tolerance_percent),
        ),
        (
            "detect.drift.offset_tolerance".into(),
            short(drift.offset_tolerance),
        ),
        (
            "detect.screen.raw_low".into(),
            short(config.detect.screen.raw_low),
        ),
        (
            "detect.screen.raw_high".into(),
            short(config.detect.screen.raw_high),
        ),
    ];
    let mut config_body = html::key_values("config", &config_rows);
    if let Some(text) = &run.config.text {
        config_body.push_str(&format!(
            "<p>The configuration file as given:</p>\n<pre id=\"config-text\">{}</pre>\n",
            escape::escape(text)
        ));
    }
    config_body.push_str(&html::key_values("inputs", &run.inputs));

    if summary
        .get("events_dropped")
        .and_then(Value::as_u64)
        .unwrap_or(0)
        > 0
    {
        cautions.push("Some events were dropped because the monitor's event queue was full: the timeline is incomplete.".into());
    }
    if let Some(stopped) = summary.get("stopped_at").and_then(Value::as_str) {
        cautions.push(format!("The run stopped at a bad input row: {stopped}"));
    }
    let summary_checks = summary.get("checks").and_then(Value::as_u64).unwrap_or(0);
    if summary_checks != run.checks.len() as u64 {
        cautions.push(format!(
            "The per-check table has {} rows but the summary counts {summary_checks} checks: the files may come from different runs.",
            run.checks.len()
        ));
    }

    let mut sections = Vec::new();
    let mut plots_body = String::new();
    for (figure, ramp) in &figures {
        plots_body.push_str(&html::figure(figure, *ramp));
    }
    sections.push(("Plots".to_string(), plots_body));
    sections.push((
        "Summary".to_string(),
        html::key_values("summary", &summary_rows),
    ));
    sections.push(("Events and alarms".to_string(), events_body));
    sections.push(("Configuration used".to_string(), config_body));
    Ok(html::page(
        &format!("steadycal run report: {}", run.title),
        &format!(
            "{} samples, {} checks; final rung {rung_name}",
            display(summary.get("samples").unwrap_or(&Value::Null)),
            display(summary.get("checks").unwrap_or(&Value::Null))
        ),
        &cautions,
        &sections,
    ))
}

/// The report page of a lab assessment of `data` (from `file`).
pub fn assess_report(
    file: &str,
    data: &CalibrationData,
    assessment: &Assessment,
    options: &assess::AssessOptions,
) -> Result<String> {
    let origin = assessment.model.level_origin;
    let model = assess::CalibrationModel {
        basis: assessment.model.basis,
        reference_temperature: assessment.model.reference_temperature,
    };
    let fit = assessment.headline();
    let range = assessment.limits.working_range;
    let reading_sd = |y: f64| assessment.reading_spread.sd(&model, &fit.params, range, y);
    let inverse = assess::inverse::InverseModel {
        model: &model,
        params: &fit.params,
        covariance: &fit.covariance,
        reading_sd: &reading_sd,
        range,
    };
    let curve: Vec<(f64, f64)> = (0..=64)
        .map(|i| range[0] + (range[1] - range[0]) * i as f64 / 64.0)
        .map(|r| (r, model.mean(&fit.params, r, 0.0)))
        .collect();
    let band: Vec<(f64, f64, f64)> = curve
        .iter()
        .filter_map(|&(_, raw)| {
            let row = assess::inverse::inverse_row(
                &inverse,
                raw,
                options.readings_averaged,
                assessment.inverse_prediction.coverage_factor,
            );
            Some((raw, row.value?, row.expanded_uncertainty?))
        })
        .collect();
    let mut figures: Vec<(Figure, bool)> = Vec::new();
    figures.push((
        plot::calibration::plot(&CalibrationPlot {
            points: data.reference.iter().copied().zip(data.raw.iter().copied()).collect(),
            points_name: "standards".into(),
            curve,
            band,
            coverage_factor: assessment.inverse_prediction.coverage_factor,
            limits: Some((assessment.lod, assessment.loq)),
            x_label: "reference value (reference units)".into(),
            y_label: "raw output (raw units)".into(),
            note: format!(
                "The {} fit over the range of the standards, {}–{} reference units, with the expanded uncertainty (k = {}) of a single reading read back through it, drawn horizontally; LOD and LOQ ({}) marked.",
                assessment.inverse_prediction.fit.to_uppercase(),
                short(range[0]),
                short(range[1]),
                short(assessment.inverse_prediction.coverage_factor),
                assessment.limits.convention
            ),
        })?,
        false,
    ));
    let n = data.raw.len().max(2) as f64;
    let order = |i: usize| i as f64 / (n - 1.0);
    let mut series = vec![ScatterSeries {
        name: "ols".into(),
        description: "ordinary least squares residuals (constant scatter assumed)".into(),
        points: assessment
            .ols
            .fit
            .fitted
            .iter()
            .zip(&assessment.ols.fit.residuals)
            .enumerate()
            .map(|(i, (f, r))| (f - origin, *r, order(i)))
            .collect(),
    }];
    if let Some(wls) = &assessment.wls {
        series.push(ScatterSeries {
            name: "wls".into(),
            description: format!(
                "weighted residuals × √weight, rescaled to the OLS SD (SD ∝ level^{})",
                short(wls.exponent)
            ),
            points: {
                let f = &wls.report.fit;
                let scale = assessment.ols.fit.residual_sd / f.residual_sd.max(f64::MIN_POSITIVE);
                f.fitted
                    .iter()
                    .zip(&f.residuals)
                    .zip(&f.weights)
                    .enumerate()
                    .map(|(i, ((fit, r), w))| (fit - origin, r * w.sqrt() * scale, order(i)))
                    .collect()
            },
        });
    }
    figures.push((
        plot::residuals::plot(&ResidualPlot {
            id: "residuals",
            title: "Residuals against fitted level".into(),
            note: "Residuals of each standard against its fitted level, coloured by row order. OLS residuals that fan out to the right mean the scatter tracks the level; the weighted residuals should be flat.".into(),
            caption: "Residuals against fitted level".into(),
            x_label: "fitted level (raw units, log scale)".into(),
            y_label: "residual (raw units)".into(),
            series: &series,
            guides: vec![(0.0, Dash::Solid)],
        })?,
        true,
    ));
    if let Some(spread) = &assessment.spread {
        let bins = spread
            .points
            .iter()
            .map(|p| SpreadBin {
                level: p.level,
                sd: p.sd,
                se: p.sd / (2.0 * (p.count as f64 - 1.0).max(1.0)).sqrt(),
                count: p.count as f64,
            })
            .collect();
        figures.push((
            plot::spread::plot(&SpreadPlot {
                bins,
                exponent: Some((
                    spread.k,
                    spread.k_se,
                    "weighted fit of ln SD on ln level".into(),
                )),
                rung: rung_lambda(assessment.recommended)
                    .map(|l| (assessment.recommended.to_string(), l)),
                x_label: "level (raw units above the origin, log scale)".into(),
            })?,
            false,
        ));
    }
    let value = serde_json::to_value(assessment)?;
    let mut rows: Vec<(String, String)> = vec![("run".into(), file.to_string())];
    for key in [
        "observations",
        "reference_levels",
        "replicates",
        "recommended",
        "weighting_preferred",
        "lod",
        "loq",
    ] {
        if let Some(v) = value.get(key) {
            rows.push((key.into(), display(v)));
        }
    }
    for (name, fit) in [
        ("ols", Some(&assessment.ols.fit)),
        ("wls", assessment.wls.as_ref().map(|w| &w.report.fit)),
    ] {
        if let Some(fit) = fit {
            for (i, p) in fit.params.iter().enumerate() {
                let pname = assessment
                    .model
                    .parameter_names
                    .get(i)
                    .copied()
                    .unwrap_or("?");
                rows.push((
                    format!("{name}.{pname}"),
                    format!("{} ± {}", short(*p), short(fit.param_se[i])),
                ));
            }
            rows.push((format!("{name}.residual_sd"), short(fit.residual_sd)));
        }
    }
    if let Some(spread) = &assessment.spread {
        rows.push((
            "spread k".into(),
            format!("{} ± {}", short(spread.k), short(spread.k_se)),
        ));
    }
    if let Some(b) = &assessment.boxcox {
        rows.push(("Box–Cox λ".into(), short(b.lambda)));
    }
    rows.push(("Koenker p".into(), short(assessment.koenker.p_value)));
    rows.extend(assess::render::metrology_rows(assessment));
    let inverse_rows: Vec<Vec<String>> = assessment
        .inverse_prediction
        .rows
        .iter()
        .map(|r| {
            vec![
                short(r.raw),
                r.readings_averaged.to_string(),
                r.value.map(short).unwrap_or_else(|| "-".into()),
                r.standard_uncertainty
                    .map(short)
                    .unwrap_or_else(|| "-".into()),
                r.expanded_uncertainty
                    .map(short)
                    .unwrap_or_else(|| "-".into()),
                r.within_range.to_string(),
            ]
        })
        .collect();
    let mut cautions = base_cautions();
    cautions.extend(assessment.notes.iter().cloned());
    let mut plots_body = String::new();
    for (figure, ramp) in &figures {
        plots_body.push_str(&html::figure(figure, *ramp));
    }
    let sections = vec![
        ("Plots".to_string(), plots_body),
        ("Summary".to_string(), html::key_values("summary", &rows)),
        (
            "Inverse prediction".to_string(),
            html::table(
                "inverse",
                &[
                    "raw",
                    "m (readings averaged)",
                    "value",
                    "standard uncertainty",
                    "expanded uncertainty",
                    "within range",
                ],
                &inverse_rows,
            ),
        ),
        (
            "Configuration used".to_string(),
            html::key_values(
                "config",
                &[
                    ("basis".into(), assessment.model.basis.name().to_string()),
                    ("level origin".into(), short(origin)),
                    ("alpha".into(), short(options.alpha)),
                    (
                        "coverage factor".into(),
                        short(assessment.inverse_prediction.coverage_factor),
                    ),
                ],
            ),
        ),
    ];
    Ok(html::page(
        &format!("steadycal lab assessment report: {file}"),
        &format!(
            "{} observations at {} reference levels; recommended rung {}",
            assessment.observations, assessment.reference_levels, assessment.recommended
        ),
        &cautions,
        &sections,
    ))
}
