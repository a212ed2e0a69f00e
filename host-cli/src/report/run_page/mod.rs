//! The report page of a replay run (`steadycal report`, `replay --report`): [`run_report`]
//! composes it from the figures of `figures` (checks and parameters) and `timeline`
//! (events), the summary, events and configuration tables below, and the cautions.

mod figures;
mod timeline;

use anyhow::Result;
use serde_json::Value;
use steadycal_core::event::KindId;

use super::model::RunData;
use super::plot::short;
use super::{base_cautions, display, escape, html, model, TimeAxis, EVENT_ROWS};

/// The report page of a replay run.
pub fn run_report(run: &RunData) -> Result<String> {
    let summary = &run.summary;
    let alarms = run.alarms();
    let time = TimeAxis::new(run.first_t(), run.last_t());
    let mut cautions = base_cautions();

    let view = figures::CheckView::new(run);
    cautions.extend(view.thinning_caution());
    let mut figures = view.residual_figures()?;
    figures.push((view.spread_figure()?, false));
    figures.push((view.calibration_figure()?, false));
    figures.extend(figures::drift_figures(run, &alarms, &time)?);
    figures.push((timeline::figure(run, &alarms, &time)?, false));

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
            "{} samples, {} checks; final rung {}",
            display(summary.get("samples").unwrap_or(&Value::Null)),
            display(summary.get("checks").unwrap_or(&Value::Null)),
            view.rung_name
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
        .filter(|e| e.kind != KindId::SampleRejected.name())
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
