//! The timeline figure of a replay run: one row per event kind present (the alarms that a
//! `cleared` event ends, then transform switches, mean misfits and rejections), alarm
//! intervals shaded, raises and clears marked; rejections drawn once per 1/600 of the run.

use anyhow::Result;
use steadycal_core::event::KindId;

use super::super::model::{self, AlarmInterval, RunData};
use super::super::plot::timeline::TimelinePlot;
use super::super::plot::{self, Figure};
use super::super::TimeAxis;

/// The timeline of `run`'s events with its `alarms` intervals.
pub fn figure(run: &RunData, alarms: &[AlarmInterval], time: &TimeAxis) -> Result<Figure> {
    let cleared = KindId::Cleared.name();
    let rejected = KindId::SampleRejected.name();
    let mut rows: Vec<String> = Vec::new();
    let order = model::alarm_kinds().chain(
        [
            KindId::TransformChanged,
            KindId::MeanMisfit,
            KindId::SampleRejected,
        ]
        .map(KindId::name),
    );
    for kind in order {
        let present = run
            .events
            .iter()
            .any(|e| e.kind == kind || (e.kind == cleared && e.alarm.as_deref() == Some(kind)));
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
        if event.kind == cleared {
            if let Some(row) = event.alarm.as_deref().and_then(row_of) {
                clears.push((row, t));
            }
        } else if event.raises_alarm() {
            if let Some(row) = row_of(&event.kind) {
                raises.push((row, t));
            }
        } else if let Some(row) = row_of(&event.kind) {
            if event.kind == rejected {
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
    let mut note = String::from("Every alarm raise and clear is drawn.");
    if rejections_thinned > 0 {
        note.push_str(&format!(
            " Rejected samples are drawn once per 1/600 of the run ({rejections_thinned} more are counted in the summary)."
        ));
    }
    plot::timeline::plot(&TimelinePlot {
        rows,
        intervals,
        raises,
        clears,
        others,
        x_label: time.label.clone(),
        span: (s0, s1),
        note,
    })
}
