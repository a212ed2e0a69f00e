//! `steadycal watch [FILE|-]`: the same engine on a live line stream.
//!
//! A reader thread parses lines as they arrive (a pipe from a serial port, `tail -f`) and
//! hands samples to the engine thread over a channel; the engine thread prints each event
//! the moment it is raised, redraws a status line (on a terminal) and stops cleanly on end
//! of input or Ctrl-C, then writes its summary. Ctrl-C is caught with the `ctrlc` crate: it
//! installs one portable SIGINT/SIGTERM handler (Windows console events too) that only sets
//! a flag, which the engine thread polls between samples; the reader thread, blocked in
//! `read`, is simply left behind when the process exits.

use std::fmt::Display;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, RecvTimeoutError};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use clap::Args;
use steadycal_core::real::Real;
use steadycal_core::sample::Sample;

use super::watch_mqtt::MqttArgs;
use super::{
    exit_alarms, exit_bad_input, human_summary, reaches, resolve, ChatterArgs, ColumnArgs, FailOn,
    MonitorArgs, Resolved,
};
use crate::feed::{CsvFeed, FeedError};
use crate::field::missing::MissingTally;
use crate::io::create_output;
use crate::mqtt::service::Setup;
use crate::precision::Precision;
use crate::replay::engine::Engine;
use crate::replay::sink::events::{event_json, write_event};
use crate::replay::time_order::TimeStep;
use crate::terminal::{colour_enabled, paint, stderr_is_terminal, stdout_is_terminal, Colour};

/// Arguments of `watch`.
#[derive(Args, Debug)]
#[command(after_help = super::after_help(concat!(
    "Examples:\n",
    "  stty -F /dev/ttyUSB0 115200 raw && steadycal watch /dev/ttyUSB0 --config monitor.toml\n",
    "  tail -f -n +1 logger.csv | steadycal watch - --summary summary.json\n",
    "  steadycal watch feed.csv --json | jq -c 'select(.kind != \"sample_rejected\")'\n",
    "  steadycal watch --mqtt mqtt://localhost --topic 'plant/+/feed' --state-dir state\n\n",
    "Events go to standard output as they happen: JSON lines when it is not a terminal (or\n",
    "with --json), one readable line each on a terminal. The status line is drawn on\n",
    "standard error when it is a terminal. Ctrl-C or end of input stops the watch and\n",
    "writes the summary.\n\n",
    "With --mqtt, samples come from the broker (one channel per `+` level of --topic) and\n",
    "events, alarm states and statuses go to it under --publish-prefix (README, \"Live on\n",
    "an MQTT broker\"); SIGINT or SIGTERM saves the state and stops.",
)))]
pub struct WatchArgs {
    /// The stream: a CSV with a header line, as in `replay` (`-` = stdin, the default).
    #[arg(default_value = "-")]
    pub input: PathBuf,
    /// Print events as JSON lines even on a terminal.
    #[arg(long)]
    pub json: bool,
    /// Also write events as JSON lines to this file.
    #[arg(long, value_name = "FILE")]
    pub events: Option<PathBuf>,
    /// Write the summary as JSON here when the watch stops (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub summary: Option<PathBuf>,
    /// Skip malformed rows (counted in the summary) instead of stopping.
    #[arg(long)]
    pub skip_bad_rows: bool,
    /// Exit with code 1 when an event at or above this severity was raised.
    #[arg(long, value_enum, value_name = "LEVEL")]
    pub fail_on: Option<FailOn>,
    /// A cell text that means "no value" (repeatable; empty cells, NA and the
    /// configuration's columns.missing always do), e.g. --missing=-200. Time cells are
    /// read as by `replay` without field options (seconds or RFC 3339).
    #[arg(long, value_name = "TEXT", value_parser = crate::field::missing::parse_marker, allow_hyphen_values = true)]
    pub missing: Vec<String>,
    #[command(flatten)]
    pub monitor: MonitorArgs,
    #[command(flatten)]
    pub columns: ColumnArgs,
    #[command(flatten)]
    pub chatter: ChatterArgs,
    #[command(flatten)]
    pub broker: MqttArgs,
}

enum Message<R> {
    Sample(Sample<R>, u64),
    Error(FeedError),
}

/// Runs `watch`.
pub fn run(args: WatchArgs) -> anyhow::Result<ExitCode> {
    let mut resolved = resolve(&args.monitor, &args.columns, None)?;
    resolved.missing = super::with_markers(resolved.missing, &args.missing)?;
    if let Some(url) = &args.broker.mqtt {
        if !args.missing.is_empty() {
            anyhow::bail!("--missing applies to a CSV stream, not to --mqtt payloads (a JSON payload leaves out `raw` when it has no value)");
        }
        if args.input.as_os_str() != "-" || args.events.is_some() || args.summary.is_some() {
            anyhow::bail!("--mqtt reads samples from the broker and publishes events there; leave out FILE, --events and --summary");
        }
        let setup = Setup {
            config: resolved.config,
            baseline: resolved.baseline,
            columns: resolved.columns,
        };
        return crate::mqtt::run(
            &args.broker.options(url),
            setup,
            args.monitor.precision,
            args.chatter.quiet,
        );
    }
    match args.monitor.precision {
        Precision::F32 => watch::<f32>(&args, resolved),
        Precision::F64 => watch::<f64>(&args, resolved),
    }
}

fn watch<R>(args: &WatchArgs, resolved: Resolved) -> anyhow::Result<ExitCode>
where
    R: crate::feed::FeedFloat + Display + 'static,
{
    let mut engine = Engine::<R>::new(&resolved.config, resolved.baseline.as_ref())?;
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = Arc::clone(&stop);
        if let Err(error) = ctrlc::set_handler(move || stop.store(true, Ordering::SeqCst)) {
            eprintln!("steadycal: warning: cannot catch Ctrl-C ({error}); it will stop the watch without a summary");
        }
    }
    // The header is read on the reader thread too, so a silent device does not block
    // Ctrl-C; a bad header comes back as the first message.
    let (sender, receiver) = mpsc::sync_channel::<Message<R>>(4096);
    let input = args.input.clone();
    let columns = resolved.columns.clone();
    let missing = resolved.missing.clone();
    let file = input.display().to_string();
    // The reader's counts of missing cells, published whenever they change (the engine
    // thread reads them for the summary, also after Ctrl-C).
    let counts = Arc::new(Mutex::new((0u64, MissingTally::default())));
    let published = Arc::clone(&counts);
    std::thread::spawn(move || {
        let mut feed = match CsvFeed::open(&input, &columns) {
            Ok(feed) => feed.with_missing(&missing),
            Err(error) => {
                let _ = sender.send(Message::Error(error));
                return;
            }
        };
        let mut seen = 0;
        loop {
            let next = feed.next_sample::<R>();
            if feed.missing_cells() != seen {
                seen = feed.missing_cells();
                if let Ok(mut counts) = published.lock() {
                    *counts = (feed.missing_raw(), feed.missing_tally());
                }
            }
            let Some(next) = next else { break };
            let message = match next {
                Ok(sample) => Message::Sample(sample, feed.line()),
                Err(error) => Message::Error(error),
            };
            if sender.send(message).is_err() {
                return;
            }
        }
    });

    let human_events = !args.json && stdout_is_terminal();
    let status_line = !args.chatter.quiet && stderr_is_terminal();
    let colour = colour_enabled();
    let mut stdout = std::io::stdout().lock();
    let mut events_file = args.events.as_deref().map(create_output).transpose()?;
    let mut bad_input: Option<FeedError> = None;
    let mut skipped: u64 = 0;
    let mut last_draw = Instant::now();
    let mut interrupted = false;
    loop {
        if stop.load(Ordering::SeqCst) {
            interrupted = true;
            break;
        }
        let message = match receiver.recv_timeout(Duration::from_millis(100)) {
            Ok(message) => message,
            Err(RecvTimeoutError::Timeout) => {
                if status_line {
                    draw_status(&engine, colour);
                }
                continue;
            }
            Err(RecvTimeoutError::Disconnected) => break,
        };
        let (sample, line) = match message {
            Message::Sample(sample, line) => (sample, line),
            Message::Error(error) => {
                if args.skip_bad_rows && error.line().is_some() {
                    skipped += 1;
                    if !args.chatter.quiet {
                        clear_status(status_line);
                        eprintln!("steadycal: warning: skipped: {error}");
                    }
                    continue;
                }
                bad_input = Some(error);
                break;
            }
        };
        let step = engine.time_order.check(sample.t, line);
        if step != TimeStep::Forward && !args.chatter.quiet {
            clear_status(status_line);
            let what = if step == TimeStep::Repeated {
                "repeats the previous row's time"
            } else {
                "is before the previous row's time"
            };
            eprintln!(
                "steadycal: warning: {file}:{line}: time {} {what}",
                sample.t
            );
        }
        let t = sample.t;
        let mut printed = false;
        engine.push(&sample, |event| {
            if let Some(out) = events_file.as_mut() {
                write_event(&mut **out, event, t)?;
                out.write_all(b"\n")?;
            }
            if !printed {
                clear_status(status_line);
                printed = true;
            }
            if human_events {
                writeln!(stdout, "{}", describe(&event_json(event, t), colour))?;
            } else {
                write_event(&mut stdout, event, t)?;
                stdout.write_all(b"\n")?;
            }
            Ok(())
        })?;
        if printed {
            stdout.flush()?;
            if let Some(out) = events_file.as_mut() {
                out.flush()?;
            }
        }
        if status_line && last_draw.elapsed() >= Duration::from_millis(200) {
            draw_status(&engine, colour);
            last_draw = Instant::now();
        }
    }
    clear_status(status_line);
    if let Some(mut out) = events_file {
        out.flush()?;
    }
    stdout.flush()?;
    drop(stdout);
    let mut summary = engine.summary(&file, args.monitor.precision, bad_input.as_ref());
    if let serde_json::Value::Object(map) = &mut summary {
        map.insert("rows_skipped".into(), serde_json::json!(skipped));
        map.insert("interrupted".into(), serde_json::json!(interrupted));
        let (missing_raw, missing) = counts.lock().map(|c| c.clone()).unwrap_or_default();
        map.insert("missing_raw".into(), serde_json::json!(missing_raw));
        map.insert("missing".into(), serde_json::json!(missing.by_column));
    }
    if let Some(path) = &args.summary {
        let mut out = create_output(path)?;
        serde_json::to_writer_pretty(&mut out, &summary)?;
        out.write_all(b"\n")?;
        out.flush()?;
    }
    // HOOK(persistence): write the snapshot of `engine.monitor` here (`--save-snapshot`),
    // after the summary, so a watch stopped by Ctrl-C can be resumed.
    if args.chatter.human() {
        eprintln!("{}", human_summary(&summary, colour));
    }
    if let Some(error) = bad_input {
        eprintln!("steadycal: {error}");
        return Ok(exit_bad_input());
    }
    if reaches(&engine.raised, args.fail_on) {
        return Ok(exit_alarms());
    }
    Ok(ExitCode::SUCCESS)
}

/// One readable line for an event (terminal output).
fn describe(event: &serde_json::Value, colour: bool) -> String {
    let kind = event["kind"].as_str().unwrap_or("?");
    let severity = event.get("severity").and_then(|s| s.as_str());
    let painted = match severity {
        Some("alarm") => paint(kind, Colour::Red, colour),
        Some("warn") => paint(kind, Colour::Yellow, colour),
        _ => paint(kind, Colour::Bold, colour),
    };
    let mut fields = Vec::new();
    if let Some(map) = event.as_object() {
        for (key, value) in map {
            if !matches!(key.as_str(), "kind" | "seq" | "t") {
                fields.push(format!("{key}={value}"));
            }
        }
    }
    format!(
        "t={} seq={} {painted} {}",
        event["t"],
        event["seq"],
        fields.join(" ")
    )
}

fn draw_status<R: Real + Display>(engine: &Engine<R>, colour: bool) {
    let counters = engine.monitor.counters();
    let exponent = engine
        .monitor
        .spread_exponent()
        .map(|e| format!("{:.2}", e.k.to_f64()))
        .unwrap_or_else(|| "-".into());
    let alarms = engine.raised[2];
    let warnings = engine.raised[1];
    let state = if alarms > 0 {
        paint(&format!("{alarms} alarms"), Colour::Red, colour)
    } else if warnings > 0 {
        paint(&format!("{warnings} warnings"), Colour::Yellow, colour)
    } else {
        paint("ok", Colour::Green, colour)
    };
    let mut stderr = std::io::stderr().lock();
    let _ = write!(
        stderr,
        "\r\x1b[2K{} samples, {} checks, rung {}, k {exponent}, t {}: {state}",
        counters.samples,
        counters.checks,
        engine.monitor.rung().name(),
        engine.last_t,
    );
    let _ = stderr.flush();
}

fn clear_status(enabled: bool) {
    if enabled {
        let mut stderr = std::io::stderr().lock();
        let _ = write!(stderr, "\r\x1b[2K");
        let _ = stderr.flush();
    }
}
