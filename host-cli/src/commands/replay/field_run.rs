//! `replay` on field logs: the working range from the data when nothing sets it (a first
//! pass over the checks), the run through the replay engine, the field summary entries,
//! the warnings, `--save-config` and `--strict`.

use std::io::Write;

use anyhow::Result;
use serde_json::Value;

use super::ReplayArgs;
use crate::commands::field::{range_source, save_config, summary_entries, FieldPlan};
use crate::feed::FeedFloat;
use crate::feed::ParsedRow;
use crate::field::rows::{FieldSample, FieldTally, JoinedSamples, LogSamples};
use crate::io::create_output;
use crate::replay::pipeline::replay_rows;
use crate::replay::{Precision, ReplayOptions, ReplayResult};

/// Quantiles of the checks' raw values that set a range from the data (robust ends: one
/// check in a hundred may lie outside at each end; common practice, no source).
pub const RANGE_QUANTILES: (f64, f64) = (0.01, 0.99);
/// Largest systematic sample of check values kept for those quantiles.
const RANGE_SAMPLE: usize = 8192;

/// Samples of a field run, one log or two joined.
enum Samples<R: FeedFloat> {
    One(Box<LogSamples<R>>),
    Two(Box<JoinedSamples<R>>),
}

impl<R: FeedFloat> Samples<R> {
    fn open(plan: &FieldPlan, options: &ReplayOptions) -> Result<Self> {
        let (sensor, reference) = plan.open(&options.feed)?;
        let tally = FieldTally::new();
        Ok(match (reference, &plan.reference) {
            (Some(reference), Some((_, _, offset, pairing))) => Samples::Two(Box::new(
                JoinedSamples::new(sensor, reference, *offset, *pairing, tally),
            )),
            _ => Samples::One(Box::new(LogSamples::new(sensor, tally))),
        })
    }

    fn tally(&self) -> &FieldTally {
        match self {
            Samples::One(s) => &s.tally,
            Samples::Two(s) => &s.tally,
        }
    }
}

impl<R: FeedFloat> Iterator for Samples<R> {
    type Item = FieldSample<R>;
    fn next(&mut self) -> Option<FieldSample<R>> {
        match self {
            Samples::One(s) => s.next(),
            Samples::Two(s) => s.next(),
        }
    }
}

/// Robust ends of the checks' raw values (first pass), as a working range above the
/// origin (the raw value stands for the fitted level, which it estimates without the
/// warm-up a fit needs); `None` when there are too few checks or the ends do not make a
/// range.
fn range_from_data<R: FeedFloat>(
    plan: &FieldPlan,
    options: &ReplayOptions,
) -> Result<Option<(f64, f64)>> {
    let mut samples = Samples::<R>::open(plan, options)?;
    let (mut kept, mut stride, mut seen) = (Vec::new(), 1u64, 0u64);
    for sample in samples.by_ref() {
        let Ok(sample) = sample.next else { continue };
        if sample.reference.is_none() || !sample.raw.to_f64().is_finite() {
            continue;
        }
        if seen.is_multiple_of(stride) {
            if kept.len() == RANGE_SAMPLE {
                kept = kept.iter().copied().step_by(2).collect();
                stride *= 2;
            }
            if seen.is_multiple_of(stride) {
                kept.push(sample.raw.to_f64());
            }
        }
        seen += 1;
    }
    if kept.len() < 20 {
        return Ok(None);
    }
    kept.sort_by(f64::total_cmp);
    let at = |p: f64| kept[((p * kept.len() as f64).ceil() as usize).clamp(1, kept.len()) - 1];
    let origin = options.config.level_origin;
    let (low, high) = (
        at(RANGE_QUANTILES.0) - origin,
        at(RANGE_QUANTILES.1) - origin,
    );
    if !(low > 0.0 && high > low && high.is_finite()) {
        return Ok(None);
    }
    Ok(Some((low, high)))
}

/// Rows handed from the reading thread to the engine at a time.
const BATCH: usize = 4096;

/// The run: the logs are read (and joined) on a second thread, in batches, while the
/// engine runs on this one, as the canonical CSV path does.
fn run_typed<R: FeedFloat + std::fmt::Display>(
    plan: &FieldPlan,
    options: &ReplayOptions,
) -> Result<(ReplayResult, FieldTally)> {
    let samples = Samples::<R>::open(plan, options)?;
    // Warnings name the channel of a file of many sensors (the summary's `file` is the
    // file's own name, set by the caller).
    let file = match &options.channel {
        Some(channel) => format!("{}[{channel}]", options.feed.display()),
        None => options.feed.display().to_string(),
    };
    let (sender, receiver) = std::sync::mpsc::sync_channel::<Vec<FieldSample<R>>>(8);
    std::thread::scope(|scope| {
        let reader = scope.spawn(move || {
            let mut samples = samples;
            loop {
                let batch: Vec<FieldSample<R>> = samples.by_ref().take(BATCH).collect();
                let done = batch.len() < BATCH;
                // The engine stops reading at a bad row or an output error: the counts
                // then cover what was read.
                if sender.send(batch).is_err() || done {
                    return samples.tally().clone();
                }
            }
        });
        let rows = receiver.into_iter().flatten().map(|s| ParsedRow {
            next: s.next,
            line: s.line,
            bytes: s.bytes,
        });
        let result = replay_rows::<R>(rows, &file, options);
        let tally = match reader.join() {
            Ok(tally) => tally,
            Err(panic) => std::panic::resume_unwind(panic),
        };
        Ok((result?, tally))
    })
}

/// Runs `replay` on field logs; the summary is written here, with the field entries. The
/// working range found in the data is left in `options`.
pub fn run(
    args: &ReplayArgs,
    options: &mut ReplayOptions,
    plan: &FieldPlan,
) -> Result<ReplayResult> {
    let config_has_range = match &args.monitor.config {
        Some(path) => {
            let file = crate::config::ConfigFile::read(path)?;
            file.range.low.is_some() || file.range.high.is_some()
        }
        None => false,
    };
    let explicit =
        config_has_range || args.monitor.level_low.is_some() || args.monitor.level_high.is_some();
    let mut from_data = false;
    if !explicit && options.feed.as_os_str() != "-" && options.persist.resume.is_none() {
        let found = match options.precision {
            Precision::F32 => range_from_data::<f32>(plan, options)?,
            Precision::F64 => range_from_data::<f64>(plan, options)?,
        };
        if let Some((low, high)) = found {
            options.config.level_low = low;
            options.config.level_high = high;
            from_data = true;
        }
    }
    let source = range_source(&args.monitor, config_has_range, from_data);
    options.range_source = source;
    let summary_path = options.summary.take();
    let (mut result, tally) = match options.precision {
        Precision::F32 => run_typed::<f32>(plan, options)?,
        Precision::F64 => run_typed::<f64>(plan, options)?,
    };
    if let Value::Object(map) = &mut result.summary {
        summary_entries(map, &tally, plan);
    }
    // A log whose every raw cell is missing says so (the run's own check counts no blank
    // rows: the field reader counts them).
    crate::replay::run::no_values(
        &mut result.error,
        &mut result.summary,
        plan.sensor.raw.first().map_or("raw", String::as_str),
        &plan.sensor.missing,
        tally.blank_rows,
    );
    if let Value::Object(map) = &mut result.summary {
        map.insert(
            "level_low".into(),
            serde_json::json!(options.config.level_low),
        );
        map.insert(
            "level_high".into(),
            serde_json::json!(options.config.level_high),
        );
    }
    if let Some(path) = &summary_path {
        let mut out = create_output(path)?;
        serde_json::to_writer_pretty(&mut out, &result.summary)?;
        out.write_all(b"\n")?;
        out.flush()?;
    }
    let file = options.feed.display();
    if options.warnings {
        if let (Some(join), Some((path, ..))) = (&tally.join, &plan.reference) {
            if join.backwards > 0 {
                let lines: Vec<String> = join.backwards_lines.iter().map(u64::to_string).collect();
                eprintln!(
                    "steadycal: warning: {}: {} reference rows go back in time or repeat one (lines {}); they were left out of the join, the other rows were paired as usual",
                    path.display(),
                    join.backwards,
                    lines.join(", ")
                );
            }
            if join.unpaired > 0 {
                eprintln!(
                    "steadycal: warning: {}: {} of {} reference rows found no sensor sample to pair with (counted in the summary's `join`)",
                    path.display(),
                    join.unpaired,
                    join.reference_rows
                );
            }
        }
        let c = &options.config;
        for value in plan
            .sensor
            .missing
            .inside(c.level_origin + c.level_low, c.level_origin + c.level_high)
        {
            eprintln!(
                "steadycal: warning: {file}: the missing marker {value} is also a valid reading of the working range; the cells it removed are counted in the summary's `missing`"
            );
        }
    }
    if let Some(path) = &args.field.save_config {
        save_config(
            path,
            args.monitor.config.as_deref(),
            options.config.level_low,
            options.config.level_high,
            source,
        )?;
    }
    options.summary = summary_path;
    Ok(result)
}
