//! The service loop of `watch --mqtt`.
//!
//! A network thread drives the client's connection (reading, writing, reconnecting with a
//! backoff of 0.1 s doubling to 10 s) and hands every notification over a channel to the
//! engine thread, which owns the channels and publishes through the client.
//!
//! Delivery (at least once, nothing lost): a sample message is acknowledged to the broker
//! only at a save point, reached when `--ack-window` samples wait, when a channel has
//! counted `--save-every` checks since its last save, when no message came for 0.2 s, and
//! on shutdown; a save point waits until the broker has confirmed every message published
//! so far, then saves the state directory, then acknowledges. After a crash the broker
//! sends the unacknowledged samples again: those at or before the channel's last time are
//! counted as `redelivered` and left out (whatever their DUP flag: mosquitto sends a
//! message it wrote just before a connection closed again without it), the others are
//! processed again, and their events published again with the same `seq` (a reader
//! keeps the first of a (`channel`, `seq`, `kind`) line).
//!
//! The broker's confirmations of what steadycal publishes are counted per publication by
//! packet id ([`Confirmations`]); a save point waits until every publication is confirmed
//! or given up (the broker kept no session, or 5 s passed).
//!
//! SIGINT or SIGTERM stops the service cleanly (exit status 0), connected or not: it saves,
//! acknowledges what it may, disconnects, and says so; a service that never connected says
//! why on standard error.
//!
//! Invariant: a message is acknowledged only on the connection it came on. An MQTT 3.1.1
//! acknowledgement names a packet id, and the broker hands a freed id to the next message;
//! an acknowledgement of a message from a lost connection, written on the next one, frees
//! the id of the copy sent again, and the acknowledgement of that copy then acknowledges
//! an unrelated later message before it is saved (lost if steadycal stops before saving
//! it). Each sample carries its connection's [`Generation`]; the network thread bumps the
//! generation under a lock and drops the acknowledgements still queued in the client, the
//! engine acknowledges under the same lock, only samples of the current generation.

use std::collections::HashMap;
use std::fmt::Display;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, RecvTimeoutError};
use std::sync::{Arc, Mutex, PoisonError};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use anyhow::Result;
use rumqttc::{Client, Connection, Event, Outgoing, Packet, Publish, QoS, Request};
use serde_json::{json, Value};

use super::channel::Channel;
use super::confirm::{Confirmations, Counts};
use super::payload::{parse, Malformed, PayloadFormat};
use super::state::StateDir;
use super::topics::{valid_channel, Output, Topics};
use crate::feed::ColumnNames;
use crate::feed::FeedFloat;
use crate::replay::engine::Engine;

/// Time without a message after which the waiting samples are saved and acknowledged.
const IDLE: Duration = Duration::from_millis(200);
/// Longest wait, on shutdown, for the broker to confirm what was published.
const CONFIRM_WAIT: Duration = Duration::from_secs(5);
/// Refused channels printed on standard error before going quiet (every 1,000th after).
const REFUSALS_SHOWN: u64 = 10;

/// The number of the current connection (see the module's invariant).
#[derive(Clone, Default)]
pub struct Generation(Arc<Mutex<u64>>);

impl Generation {
    fn lock(&self) -> std::sync::MutexGuard<'_, u64> {
        self.0.lock().unwrap_or_else(PoisonError::into_inner)
    }
}

/// What the network thread hands over.
pub enum Note {
    /// A packet in or out, and the generation of the connection it came on.
    Event(Event, u64),
    /// The connection was lost (the reason) and is retried after the delay.
    Lost(String, Duration),
    /// The broker kept no session (sent just before its `CONNACK`): the client dropped
    /// what the last connection left unacknowledged, and these publications it had not
    /// written.
    NewSession {
        /// Publications handed to the client and not written when the connection ended.
        unwritten: u64,
    },
}

/// Publications the client holds unwritten (packet id 0) after [`rumqttc::EventLoop::clean`].
fn unwritten(connection: &Connection) -> u64 {
    connection
        .eventloop
        .pending
        .iter()
        .filter(|request| matches!(request, Request::Publish(p) if p.pkid == 0))
        .count() as u64
}

/// Starts the network thread.
pub fn network(
    mut connection: Connection,
    stop: Arc<AtomicBool>,
    generation: Generation,
) -> Receiver<Note> {
    let (sender, receiver) = mpsc::channel();
    std::thread::spawn(move || {
        let mut backoff = Duration::from_millis(100);
        let mut current = *generation.lock();
        let mut held = 0;
        while let Ok(notification) = connection.recv() {
            match notification {
                Ok(event) => {
                    if let Event::Incoming(Packet::ConnAck(ack)) = &event {
                        backoff = Duration::from_millis(100);
                        // The client cleared what it held (`EventLoop::poll`).
                        if !ack.session_present
                            && sender.send(Note::NewSession { unwritten: held }).is_err()
                        {
                            return;
                        }
                        held = 0;
                    }
                    if sender.send(Note::Event(event, current)).is_err() {
                        return;
                    }
                }
                Err(error) => {
                    {
                        // The client dropped the acknowledgements queued when the connection
                        // ended; drop those the engine queued since, before it can see the
                        // new generation.
                        let mut shared = generation.lock();
                        *shared += 1;
                        current = *shared;
                        connection.eventloop.clean();
                        held = unwritten(&connection);
                    }
                    if stop.load(Ordering::SeqCst) {
                        return;
                    }
                    if sender.send(Note::Lost(error.to_string(), backoff)).is_err() {
                        return;
                    }
                    let until = Instant::now() + backoff;
                    while Instant::now() < until && !stop.load(Ordering::SeqCst) {
                        std::thread::sleep(Duration::from_millis(20));
                    }
                    if stop.load(Ordering::SeqCst) {
                        return;
                    }
                    backoff = (backoff * 2).min(Duration::from_secs(10));
                }
            }
        }
    });
    receiver
}

/// What every channel starts from: the monitor configuration, the commissioned baseline,
/// the payload's field names.
#[derive(Clone, Debug)]
pub struct Setup {
    /// The monitor configuration.
    pub config: steadycal_core::monitor::MonitorConfig<f64>,
    /// The commissioned baseline, if any.
    pub baseline: Option<steadycal_config::Commissioned>,
    /// Field (column) names.
    pub columns: ColumnNames,
}

/// Settings of the loop.
pub struct Settings {
    /// The broker as it may be printed.
    pub shown: String,
    /// Topics.
    pub topics: Topics,
    /// Payload format.
    pub format: PayloadFormat,
    /// Largest payload.
    pub max_payload: usize,
    /// Channel cap.
    pub max_channels: usize,
    /// Save every N checks.
    pub save_every: u64,
    /// Acknowledge at the latest when N samples wait.
    pub ack_window: usize,
    /// Status every N checks.
    pub status_every: u64,
    /// Status of every channel every S seconds.
    pub status_period: Duration,
    /// Print nothing but errors.
    pub quiet: bool,
}

/// The connection as the status reports it.
#[derive(Default)]
struct Link {
    connected: bool,
    connects: u64,
    lost: u64,
    last_lost: Option<(String, f64)>,
    /// Why the last attempt to connect, or the last connection, ended.
    last_failure: Option<String>,
}

impl Link {
    fn json(&self, counts: Counts) -> Value {
        json!({
            "state": if self.connected { "connected" } else { "reconnecting" },
            "reconnects": self.connects.saturating_sub(1),
            "lost": self.lost,
            "last_lost_reason": self.last_lost.as_ref().map(|l| l.0.clone()),
            "last_lost_at": self.last_lost.as_ref().map(|l| l.1),
            "published": counts.published,
            "confirmed": counts.confirmed,
            "unconfirmed": counts.unconfirmed,
            "given_up": counts.given_up,
        })
    }
}

/// The engine side of the service.
pub struct Service<R: FeedFloat + Display> {
    client: Client,
    settings: Settings,
    resolved: Setup,
    state: Option<StateDir>,
    channels: Vec<Channel<R>>,
    index: HashMap<String, usize>,
    pending: Vec<(Publish, u64)>,
    generation: Generation,
    confirm: Confirmations,
    save_due: bool,
    unconfirmed_since: Option<Instant>,
    refused: u64,
    link: Link,
    last_status: Instant,
}

fn now_seconds() -> f64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map(|d| d.as_secs_f64())
        .unwrap_or(0.0)
}

impl<R: FeedFloat + Display + 'static> Service<R> {
    /// The service with the channels resumed from the state directory.
    pub fn new(
        client: Client,
        settings: Settings,
        resolved: Setup,
        state: Option<StateDir>,
        generation: Generation,
    ) -> Result<Self> {
        let mut service = Service {
            client,
            settings,
            resolved,
            channels: Vec::new(),
            index: HashMap::new(),
            pending: Vec::new(),
            generation,
            confirm: Confirmations::default(),
            save_due: false,
            unconfirmed_since: None,
            refused: 0,
            link: Link::default(),
            last_status: Instant::now(),
            state: None,
        };
        if let Some(state) = &state {
            for resumed in state.load::<R>()? {
                let origin = crate::baseline::BaselineOrigin::resumed(
                    &resumed.monitor,
                    service.resolved.baseline.as_ref(),
                );
                let mut engine = Engine::with_monitor(resumed.monitor);
                engine.baseline = origin;
                let channel = Channel::new(resumed.name, engine, resumed.record);
                service
                    .index
                    .insert(channel.name.clone(), service.channels.len());
                service.channels.push(channel);
            }
        }
        service.state = state;
        if !service.settings.quiet && !service.channels.is_empty() {
            eprintln!(
                "steadycal: resumed {} channel(s) from the state directory",
                service.channels.len()
            );
        }
        for i in 0..service.channels.len() {
            service.publish_alarms(i)?;
        }
        Ok(service)
    }

    fn publish(&mut self, topic: String, payload: Vec<u8>, retain: bool) -> Result<()> {
        self.client
            .publish(topic, QoS::AtLeastOnce, retain, payload)
            .map_err(|e| anyhow::anyhow!("cannot hand a message to the MQTT client: {e}"))?;
        self.confirm.handed();
        Ok(())
    }

    fn publish_alarms(&mut self, i: usize) -> Result<()> {
        let channel = &self.channels[i];
        let topic = self.settings.topics.output(&channel.name, Output::Alarms);
        let payload = serde_json::to_vec(&channel.alarms_json())?;
        self.publish(topic, payload, true)
    }

    fn publish_status(&mut self, i: usize) -> Result<()> {
        let channel = &mut self.channels[i];
        channel.checks_reported = channel.checks();
        let topic = self.settings.topics.output(&channel.name, Output::Status);
        let payload =
            serde_json::to_vec(&channel.status_json(&self.link.json(self.confirm.counts())))?;
        self.publish(topic, payload, true)
    }

    /// Runs until `stop` is set; returns normally after a clean shutdown.
    pub fn run(&mut self, notes: &Receiver<Note>, stop: &AtomicBool) -> Result<()> {
        loop {
            if stop.load(Ordering::SeqCst) {
                return self.shutdown(notes);
            }
            let idle = match notes.recv_timeout(IDLE) {
                Ok(note) => {
                    self.note(note)?;
                    false
                }
                Err(RecvTimeoutError::Timeout) => true,
                // The network thread ends on its own only when asked to stop.
                Err(RecvTimeoutError::Disconnected) if stop.load(Ordering::SeqCst) => {
                    return self.shutdown(notes);
                }
                Err(RecvTimeoutError::Disconnected) => {
                    anyhow::bail!("the MQTT client stopped")
                }
            };
            self.save_point(idle)?;
            if self.last_status.elapsed() >= self.settings.status_period {
                self.last_status = Instant::now();
                for i in 0..self.channels.len() {
                    self.publish_status(i)?;
                }
            }
        }
    }

    /// Counts what a note says of the broker's confirmations; true when it says nothing
    /// else.
    fn confirmation(&mut self, note: &Note) -> bool {
        match note {
            Note::Event(Event::Outgoing(Outgoing::Publish(pkid)), _) if *pkid != 0 => {
                self.confirm.written(*pkid)
            }
            Note::Event(Event::Incoming(Packet::PubAck(ack)), _) => {
                self.confirm.acknowledged(ack.pkid);
            }
            Note::NewSession { unwritten } => {
                let dropped = self.confirm.new_session(*unwritten);
                if dropped > 0 && !self.settings.quiet {
                    eprintln!("steadycal: warning: the broker kept no session; {dropped} publication(s) not confirmed are given up");
                }
            }
            _ => return false,
        }
        true
    }

    fn note(&mut self, note: Note) -> Result<()> {
        if self.confirmation(&note) {
            return Ok(());
        }
        match note {
            Note::Event(Event::Incoming(Packet::Publish(publish)), generation) => {
                self.sample(publish, generation)
            }
            Note::Event(Event::Incoming(Packet::ConnAck(ack)), _) => {
                self.link.connected = true;
                self.link.connects += 1;
                if !self.settings.quiet {
                    let again = if self.link.connects > 1 { "re" } else { "" };
                    eprintln!("steadycal: {again}connected to {}", self.settings.shown);
                }
                if self.link.connects > 1 && !ack.session_present && !self.settings.quiet {
                    eprintln!("steadycal: warning: the broker kept no session for this client id; samples published while it was away may be lost");
                }
                let filters: Vec<String> =
                    self.settings.topics.filters().map(String::from).collect();
                for filter in filters {
                    self.client
                        .subscribe(filter, QoS::AtLeastOnce)
                        .map_err(|e| anyhow::anyhow!("cannot subscribe: {e}"))?;
                }
                for i in 0..self.channels.len() {
                    self.publish_status(i)?;
                }
                Ok(())
            }
            Note::Event(..) | Note::NewSession { .. } => Ok(()),
            Note::Lost(reason, retry) => {
                // Unacknowledged samples come back, flagged, on the next connection.
                self.pending.clear();
                if self.link.connected {
                    self.link.lost += 1;
                    self.link.last_lost = Some((reason.clone(), now_seconds()));
                }
                self.link.connected = false;
                self.link.last_failure = Some(reason.clone());
                eprintln!(
                    "steadycal: broker {}: connection lost or refused ({reason}); retrying in {:.1} s",
                    self.settings.shown,
                    retry.as_secs_f64()
                );
                Ok(())
            }
        }
    }

    /// The channel a sample message goes to: its index, admitting a new channel under the
    /// cap, or the reason it is refused.
    fn admit(&mut self, name: &str) -> Result<std::result::Result<usize, String>> {
        if let Some(&i) = self.index.get(name) {
            return Ok(Ok(i));
        }
        if !valid_channel(name) {
            return Ok(Err(Malformed::BadChannelName(name.to_string()).to_string()));
        }
        if self.channels.len() >= self.settings.max_channels {
            return Ok(Err(format!(
                "channel {name:?} refused: {} channels are watched, the cap (--max-channels)",
                self.settings.max_channels
            )));
        }
        let engine = Engine::<R>::new(&self.resolved.config, self.resolved.baseline.as_ref())?;
        let i = self.channels.len();
        self.channels
            .push(Channel::new(name.to_string(), engine, None));
        self.index.insert(name.to_string(), i);
        self.publish_alarms(i)?;
        self.publish_status(i)?;
        Ok(Ok(i))
    }

    fn refuse(&mut self, publish: &Publish, reason: String) -> Result<()> {
        self.refused += 1;
        if !self.settings.quiet
            && (self.refused <= REFUSALS_SHOWN || self.refused.is_multiple_of(1000))
        {
            eprintln!(
                "steadycal: refused a message on {} ({} refused so far): {reason}",
                publish.topic, self.refused
            );
        }
        let report = json!({
            "topic": publish.topic,
            "bytes": publish.payload.len(),
            "reason": reason,
            "refused": self.refused,
        });
        let topic = self.settings.topics.refused();
        self.publish(topic, serde_json::to_vec(&report)?, false)
    }

    fn sample(&mut self, publish: Publish, generation: u64) -> Result<()> {
        let topics = &self.settings.topics;
        if topics.is_own(&publish.topic) {
            self.pending.push((publish, generation));
            return Ok(());
        }
        let parsed = parse::<R>(
            &publish.payload,
            &self.settings.format,
            &self.resolved.columns,
            self.settings.max_payload,
        );
        let name = match topics.channel_of(&publish.topic) {
            Some(Some(level)) => Ok(level.to_string()),
            _ => match &parsed {
                Ok(parsed) => parsed
                    .channel
                    .clone()
                    .ok_or(Malformed::NoChannel.to_string()),
                Err(error) => Err(error.to_string()),
            },
        };
        let admitted = match name {
            Ok(name) => self.admit(&name)?,
            Err(reason) => Err(reason),
        };
        let i = match admitted {
            Ok(i) => i,
            Err(reason) => {
                self.refuse(&publish, reason)?;
                self.pending.push((publish, generation));
                return Ok(());
            }
        };
        let parsed = match parsed {
            Ok(parsed) => parsed,
            Err(reason) => {
                let channel = &mut self.channels[i];
                channel.malformed += 1;
                channel.dirty = true;
                if !self.settings.quiet {
                    eprintln!(
                        "steadycal: warning: {}: malformed payload ({} on this channel): {reason}",
                        publish.topic, channel.malformed
                    );
                }
                let report = json!({
                    "channel": channel.name,
                    "topic": publish.topic,
                    "bytes": publish.payload.len(),
                    "reason": reason.to_string(),
                    "malformed": channel.malformed,
                });
                let topic = self.settings.topics.output(&channel.name, Output::Errors);
                self.publish(topic, serde_json::to_vec(&report)?, false)?;
                self.pending.push((publish, generation));
                return Ok(());
            }
        };
        let channel = &mut self.channels[i];
        if parsed.timed && channel.already_seen(parsed.sample.t) {
            channel.redelivered += 1;
            channel.dirty = true;
            self.pending.push((publish, generation));
            return Ok(());
        }
        let pushed = channel.push(parsed.sample, parsed.timed)?;
        let events = self.settings.topics.output(&channel.name, Output::Events);
        let report = channel.checks() - channel.checks_reported >= self.settings.status_every;
        if channel.checks() - channel.checks_saved >= self.settings.save_every {
            self.save_due = true;
        }
        for line in pushed.lines {
            self.publish(events.clone(), line, false)?;
        }
        if pushed.alarms_changed {
            self.publish_alarms(i)?;
        }
        if report {
            self.publish_status(i)?;
        }
        self.pending.push((publish, generation));
        Ok(())
    }

    /// Saves and acknowledges when a save point is due and the broker has confirmed every
    /// message published so far.
    fn save_point(&mut self, idle: bool) -> Result<()> {
        let due = self.save_due
            || self.pending.len() >= self.settings.ack_window
            || (idle && !self.pending.is_empty());
        if !due || !self.link.connected {
            return Ok(());
        }
        if !self.confirm.settled() {
            // Held until the broker confirms what was published, but never for ever: a
            // broker that stops confirming would otherwise stop every save.
            let since = *self.unconfirmed_since.get_or_insert_with(Instant::now);
            if since.elapsed() < CONFIRM_WAIT {
                return Ok(());
            }
            let lapsed = self.confirm.lapse();
            if !self.settings.quiet {
                eprintln!(
                    "steadycal: warning: {lapsed} publication(s) unconfirmed for {} s; saving anyway",
                    CONFIRM_WAIT.as_secs()
                );
            }
        }
        self.unconfirmed_since = None;
        self.save_and_ack()
    }

    fn save_and_ack(&mut self) -> Result<()> {
        if let Some(state) = &self.state {
            state.save(&mut self.channels)?;
        }
        // Under the generation's lock (module invariant): samples of an earlier connection
        // are left (the broker sends them again); one the client's full queue cannot take
        // waits for the next save point.
        let current = self.generation.lock();
        let client = &self.client;
        self.pending.retain(|(publish, generation)| {
            *generation == *current && client.try_ack(publish).is_err()
        });
        drop(current);
        self.save_due = false;
        Ok(())
    }

    /// On SIGINT or SIGTERM: wait (a while) for the broker to confirm what was published,
    /// save and acknowledge, disconnect. A service that never connected has processed
    /// nothing: it saves (nothing changed) and says why it never connected.
    fn shutdown(&mut self, notes: &Receiver<Note>) -> Result<()> {
        let never = self.link.connects == 0;
        let deadline = Instant::now() + CONFIRM_WAIT;
        while !never && !self.confirm.settled() && Instant::now() < deadline {
            match notes.recv_timeout(Duration::from_millis(50)) {
                Ok(Note::Lost(..)) => break,
                Ok(note) => {
                    // Samples arriving now are not acknowledged: they come back on restart.
                    self.confirmation(&note);
                }
                Err(RecvTimeoutError::Timeout) => {}
                Err(RecvTimeoutError::Disconnected) => break,
            }
        }
        let saved = if never || self.confirm.settled() {
            self.save_and_ack()?;
            true
        } else {
            eprintln!("steadycal: warning: the broker did not confirm every event; the state stays at the last save and the samples since then will be processed again on restart");
            false
        };
        let _ = self.client.disconnect();
        let deadline = Instant::now() + Duration::from_secs(2);
        while Instant::now() < deadline {
            match notes.recv_timeout(Duration::from_millis(50)) {
                Ok(Note::Event(Event::Outgoing(rumqttc::Outgoing::Disconnect), _)) => break,
                Ok(Note::Lost(..)) | Err(RecvTimeoutError::Disconnected) => break,
                _ => {}
            }
        }
        if never {
            let why = self
                .link
                .last_failure
                .as_deref()
                .unwrap_or("no attempt to connect had finished");
            eprintln!(
                "steadycal: stopped without ever connecting to {}: {why}",
                self.settings.shown
            );
        } else if !self.settings.quiet {
            let kept = match (&self.state, saved) {
                (Some(_), true) => "state saved",
                (Some(_), false) => "state kept at the last save",
                (None, _) => "no --state-dir, nothing saved",
            };
            eprintln!(
                "steadycal: stopped: {} channel(s), {kept}",
                self.channels.len()
            );
        }
        Ok(())
    }
}
