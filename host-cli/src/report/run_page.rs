//! The report page of a replay run (`steadycal report`, `replay --report`).

use std::collections::BTreeSet;

use anyhow::Result;
use serde_json::Value;

use super::model::RunData;
use super::plot::calibration::CalibrationPlot;
use super::plot::drift::DriftPlot;
use super::plot::residuals::{ResidualPlot, ScatterSeries};
use super::plot::spread::SpreadPlot;
use super::plot::timeline::TimelinePlot;
use super::plot::{short, Dash, Figure};
use super::{
    base_cautions, checks, display, escape, get_f64, html, model, plot, rung_lambda, spread_bins,
    thin, TimeAxis,
};
use super::{EVENT_ROWS, SCATTER_BINS, SCATTER_SLICES, SERIES_BUCKETS};

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
    let summary_rows = summary_section(summary);
    let events_body = events_section(run, &alarms);
    let config_body = config_section(run);

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

/// The rows of the page's summary table.
fn summary_section(summary: &Value) -> Vec<(String, String)> {
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
    summary_rows
}

/// The alarm intervals and the listed events, with the note on what is left out.
fn events_section(run: &RunData, alarms: &[model::AlarmInterval]) -> String {
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
    events_body
}

/// The configuration used: the keys a reader checks first, the file as given, the inputs.
fn config_section(run: &RunData) -> String {
    let config = &run.config.config;
    let drift = &config.detect.drift;
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
    config_body
}
