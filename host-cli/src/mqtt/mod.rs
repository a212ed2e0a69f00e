//! `steadycal watch --mqtt URL --topic FILTER`: the monitor as a service on an MQTT broker.
//!
//! One module per job: [`options`] (the options, the broker's address, credentials and
//! TLS), [`topics`] (channel from topic, the topics published), [`payload`] (JSON and CSV
//! sample payloads), [`channel`] (one channel: the engine `replay` drives, its numbering,
//! alarms since-when, status), [`state`] (the state directory: snapshots and records,
//! written power-safe), [`confirm`] (the broker's confirmations of what is published,
//! by packet id), [`service`] (the loop: network thread, save points, acknowledgements,
//! reconnects, shutdown).
//!
//! The client is `rumqttc` (MQTT 3.1.1) with rustls on the ring provider; the session is
//! persistent (clean session off, fixed client id) and every subscription and publication
//! is QoS 1.

pub mod channel;
pub mod confirm;
pub mod options;
pub mod payload;
pub mod service;
pub mod state;
pub mod topics;

use std::fmt::Display;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use anyhow::{bail, Result};

use crate::feed::FeedFloat;
use crate::precision::Precision;
use options::{PayloadKind, WatchOptions};
use payload::PayloadFormat;
use service::{Generation, Service, Settings, Setup};
use state::StateDir;
use topics::Topics;

/// Capacity of the client's request queue (messages handed to it and not yet written).
const REQUESTS: usize = 1 << 16;

/// Runs the MQTT watch until SIGINT or SIGTERM.
pub fn run(
    args: &WatchOptions,
    resolved: Setup,
    precision: Precision,
    quiet: bool,
) -> Result<ExitCode> {
    match precision {
        Precision::F32 => serve::<f32>(args, resolved, quiet),
        Precision::F64 => serve::<f64>(args, resolved, quiet),
    }
}

fn serve<R: FeedFloat + Display + 'static>(
    args: &WatchOptions,
    resolved: Setup,
    quiet: bool,
) -> Result<ExitCode> {
    if args.topics.is_empty() {
        bail!("--mqtt needs at least one --topic FILTER (for example --topic 'plant/+/feed')");
    }
    let topics = Topics::new(&args.topics, &args.publish_prefix).map_err(anyhow::Error::msg)?;
    let format = match (args.payload, &args.columns) {
        (PayloadKind::Json, None) => PayloadFormat::Json,
        (PayloadKind::Json, Some(_)) => bail!("--columns declares the header of CSV payloads; add --payload csv"),
        (PayloadKind::Csv, Some(columns)) => PayloadFormat::csv(columns),
        (PayloadKind::Csv, None) => bail!("--payload csv needs --columns NAMES, the header of the payload lines (for example --columns t,raw,ref)"),
    };
    for (name, value) in [
        ("--ack-window", args.ack_window as u64),
        ("--save-every", args.save_every),
        ("--status-every", args.status_every),
        ("--status-seconds", args.status_seconds),
        ("--max-channels", args.max_channels as u64),
    ] {
        if value == 0 {
            bail!("{name}: 0, expected at least 1");
        }
    }
    let broker = options::broker(args)?;
    let state = args.state_dir.as_deref().map(StateDir::open).transpose()?;
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = Arc::clone(&stop);
        ctrlc::set_handler(move || stop.store(true, Ordering::SeqCst))
            .map_err(|e| anyhow::anyhow!("cannot catch SIGINT/SIGTERM: {e}"))?;
    }
    let (client, connection) = rumqttc::Client::new(broker.options, REQUESTS);
    let settings = Settings {
        shown: broker.shown,
        topics,
        format,
        max_payload: args.max_payload,
        max_channels: args.max_channels,
        save_every: args.save_every,
        ack_window: args.ack_window,
        status_every: args.status_every,
        status_period: Duration::from_secs(args.status_seconds),
        quiet,
    };
    let generation = Generation::default();
    let mut service = Service::<R>::new(client, settings, resolved, state, generation.clone())?;
    let notes = service::network(connection, Arc::clone(&stop), generation);
    service.run(&notes, &stop)?;
    stop.store(true, Ordering::SeqCst);
    Ok(ExitCode::SUCCESS)
}
