//! `watch --mqtt` against a real broker: Debian's mosquitto, started by each test on a
//! free loopback port with a generated configuration and stopped at the end (no mock).
//! Without mosquitto the tests are skipped, unless `STEADYCAL_REQUIRE_MOSQUITTO=1` (as
//! `.ci/run` sets) makes its absence a failure.
//!
//! The expected events are what `replay` writes for the same feed: the comparison is of
//! steadycal against itself across the broker, not against an outside value.

mod common;

use std::collections::BTreeMap;
use std::io::Write;
use std::net::TcpListener;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use rumqttc::{Client, Event, MqttOptions, Packet, QoS};
use serde_json::Value;

/// Longest wait for the service to get through a feed (not a speed target).
const DEADLINE: Duration = Duration::from_secs(40);

fn mosquitto() -> Option<PathBuf> {
    let mut places: Vec<PathBuf> = std::env::var_os("PATH")
        .map(|path| std::env::split_paths(&path).collect())
        .unwrap_or_default();
    places.push("/usr/sbin".into());
    places
        .into_iter()
        .map(|dir| dir.join("mosquitto"))
        .find(|path| path.is_file())
}

fn mosquitto_required(test: &str) -> Option<PathBuf> {
    let found = mosquitto();
    if found.is_none() {
        assert!(
            std::env::var("STEADYCAL_REQUIRE_MOSQUITTO").as_deref() != Ok("1"),
            "mosquitto is required (STEADYCAL_REQUIRE_MOSQUITTO=1): apt-get install mosquitto mosquitto-clients"
        );
        eprintln!(
            "SKIPPED {test}: mosquitto not installed (apt-get install mosquitto mosquitto-clients)"
        );
    }
    found
}

/// A mosquitto on a free loopback port, with persistence in its own directory.
struct Broker {
    program: PathBuf,
    dir: PathBuf,
    port: u16,
    child: Option<Child>,
}

fn free_port() -> u16 {
    TcpListener::bind("127.0.0.1:0")
        .unwrap()
        .local_addr()
        .unwrap()
        .port()
}

impl Broker {
    fn start(program: PathBuf, dir: &Path) -> Broker {
        Broker::start_with(program, dir, "")
    }

    /// A broker whose configuration ends with `extra` (more listeners).
    fn start_with(program: PathBuf, dir: &Path, extra: &str) -> Broker {
        let port = free_port();
        let dir = dir.join("broker");
        std::fs::create_dir_all(&dir).unwrap();
        // max_queued_messages 0: no limit on what waits for an offline persistent
        // session (mosquitto drops beyond 1,000 by default).
        // user: started as root, mosquitto would switch to the `mosquitto` user, which
        // cannot write its persistence file in the test's private directory.
        let user = Command::new("id").arg("-un").output().unwrap().stdout;
        let config = format!(
            "listener {port} 127.0.0.1\nallow_anonymous true\npersistence true\npersistence_location {}/\nmax_queued_messages 0\nuser {}\n{extra}",
            dir.display(),
            String::from_utf8_lossy(&user).trim()
        );
        std::fs::write(dir.join("mosquitto.conf"), config).unwrap();
        let mut broker = Broker {
            program,
            dir,
            port,
            child: None,
        };
        broker.run();
        broker
    }

    fn run(&mut self) {
        let log = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(self.dir.join("log"))
            .unwrap();
        let child = Command::new(&self.program)
            .arg("-c")
            .arg(self.dir.join("mosquitto.conf"))
            .stdout(log.try_clone().unwrap())
            .stderr(log)
            .spawn()
            .expect("mosquitto starts");
        self.child = Some(child);
        let until = Instant::now() + Duration::from_secs(10);
        while std::net::TcpStream::connect(("127.0.0.1", self.port)).is_err() {
            assert!(Instant::now() < until, "mosquitto listens within 10 s");
            std::thread::sleep(Duration::from_millis(20));
        }
    }

    /// Stops it with SIGTERM (it writes its persistence file) and waits.
    fn stop(&mut self) {
        if let Some(mut child) = self.child.take() {
            signal(&child, "TERM");
            let _ = child.wait();
        }
    }

    /// Waits until a client with this id has connected (mosquitto's log says so).
    fn wait_for_client(&self, id: &str, times: usize) {
        let until = Instant::now() + Duration::from_secs(30);
        let needle = format!(" as {id} ");
        loop {
            let log = std::fs::read_to_string(self.dir.join("log")).unwrap_or_default();
            if log.matches(&needle).count() >= times {
                return;
            }
            assert!(Instant::now() < until, "{id} connects within 30 s");
            std::thread::sleep(Duration::from_millis(20));
        }
    }

    fn url(&self) -> String {
        format!("mqtt://127.0.0.1:{}", self.port)
    }
}

impl Drop for Broker {
    fn drop(&mut self) {
        if let Some(mut child) = self.child.take() {
            let _ = child.kill();
            let _ = child.wait();
        }
    }
}

fn signal(child: &Child, name: &str) {
    let status = Command::new("kill")
        .arg(format!("-{name}"))
        .arg(child.id().to_string())
        .status()
        .unwrap();
    assert!(status.success());
}

/// Everything published under `steadycal/`, collected by a persistent QoS 1 session
/// that reconnects when the broker goes away.
/// Messages received: topic and payload, in arrival order.
type Seen = Arc<Mutex<Vec<(String, Vec<u8>)>>>;

struct Collector {
    seen: Seen,
}

impl Collector {
    fn start(port: u16, id: &str) -> Collector {
        let mut options = MqttOptions::new(id, "127.0.0.1", port);
        options
            .set_clean_session(false)
            .set_max_packet_size(1 << 21, 1 << 21);
        let (client, mut connection) = Client::new(options, 64);
        let seen: Seen = Arc::new(Mutex::new(Vec::new()));
        let store = Arc::clone(&seen);
        std::thread::spawn(move || {
            for notification in connection.iter() {
                match notification {
                    Ok(Event::Incoming(Packet::ConnAck(_))) => {
                        let _ = client.try_subscribe("steadycal/#", QoS::AtLeastOnce);
                    }
                    Ok(Event::Incoming(Packet::Publish(p))) => {
                        store
                            .lock()
                            .unwrap()
                            .push((p.topic.clone(), p.payload.to_vec()));
                    }
                    Ok(_) => {}
                    Err(_) => std::thread::sleep(Duration::from_millis(50)),
                }
            }
        });
        Collector { seen }
    }

    fn on(&self, topic: &str) -> Vec<Vec<u8>> {
        self.seen
            .lock()
            .unwrap()
            .iter()
            .filter(|(t, _)| t == topic)
            .map(|(_, p)| p.clone())
            .collect()
    }

    fn last_json(&self, topic: &str) -> Option<Value> {
        self.on(topic)
            .last()
            .map(|p| serde_json::from_slice(p).unwrap())
    }

    /// Waits until a status message satisfies `test`.
    fn wait_for_status(&self, test: impl Fn(&Value) -> bool) {
        let until = Instant::now() + DEADLINE;
        loop {
            let found = self.seen.lock().unwrap().iter().any(|(topic, payload)| {
                topic.ends_with("/status")
                    && serde_json::from_slice::<Value>(payload).is_ok_and(|s| test(&s))
            });
            if found {
                return;
            }
            assert!(
                Instant::now() < until,
                "a status as expected within {DEADLINE:?}"
            );
            std::thread::sleep(Duration::from_millis(20));
        }
    }

    /// Waits until every channel's status counts `samples` samples.
    fn wait_for_samples(&self, expected: &[(&str, u64)]) {
        let until = Instant::now() + DEADLINE;
        loop {
            let done = expected.iter().all(|(channel, samples)| {
                self.last_json(&format!("steadycal/{channel}/status"))
                    .is_some_and(|s| s["samples"].as_u64() == Some(*samples))
            });
            if done {
                return;
            }
            assert!(
                Instant::now() < until,
                "statuses within {DEADLINE:?}: {:?}",
                expected
                    .iter()
                    .map(|(c, _)| self.last_json(&format!("steadycal/{c}/status")))
                    .collect::<Vec<_>>()
            );
            std::thread::sleep(Duration::from_millis(50));
        }
    }
}

/// `steadycal watch --mqtt` in the background.
fn watch(url: &str, state: &Path, extra: &[&str]) -> Child {
    Command::new(common::binary())
        .args([
            "watch",
            "--mqtt",
            url,
            "--topic",
            "plant/+/feed",
            "--state-dir",
        ])
        .arg(state)
        .args(["--status-seconds", "1"])
        .args(extra)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Stops the watch with SIGTERM and returns its standard error.
fn stop_watch(child: Child) -> String {
    signal(&child, "TERM");
    let output = child.wait_with_output().unwrap();
    assert!(output.status.success(), "watch exits 0 on SIGTERM");
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// The first `rows` data rows of a shipped feed as CSV text, and as one JSON payload per
/// row with the cells' text copied as JSON numbers (an empty cell is left out).
fn feed(name: &str, rows: usize) -> (String, Vec<String>) {
    let text = std::fs::read_to_string(common::feeds().join(name)).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let mut csv = header.join(",") + "\n";
    let mut payloads = Vec::new();
    for line in lines.take(rows) {
        csv.push_str(line);
        csv.push('\n');
        let fields: Vec<String> = header
            .iter()
            .zip(line.split(','))
            .filter(|(_, cell)| !cell.is_empty())
            .map(|(name, cell)| format!("\"{name}\":{cell}"))
            .collect();
        payloads.push(format!("{{{}}}", fields.join(",")));
    }
    (csv, payloads)
}

/// What `replay` writes for the CSV: the event lines and the summary.
fn replay(dir: &Path, name: &str, csv: &str) -> (Vec<Value>, Value) {
    let input = dir.join(format!("{name}.csv"));
    std::fs::write(&input, csv).unwrap();
    let events = dir.join(format!("{name}.events.jsonl"));
    let summary = dir.join(format!("{name}.summary.json"));
    common::steadycal()
        .arg("replay")
        .arg(&input)
        .arg("--events")
        .arg(&events)
        .arg("--summary")
        .arg(&summary)
        .arg("-q")
        .assert()
        .success();
    let lines = std::fs::read_to_string(&events)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let summary = serde_json::from_str(&std::fs::read_to_string(&summary).unwrap()).unwrap();
    (lines, summary)
}

/// Publishes payloads, one message each, at QoS 1 with mosquitto_pub (waits for it).
fn publish(port: u16, topic: &str, payloads: &[String]) -> Child {
    let mut child = Command::new("mosquitto_pub")
        .args([
            "-h",
            "127.0.0.1",
            "-p",
            &port.to_string(),
            "-q",
            "1",
            "-l",
            "-t",
            topic,
        ])
        .stdin(Stdio::piped())
        .spawn()
        .expect("mosquitto_pub runs");
    let mut stdin = child.stdin.take().unwrap();
    let text = payloads.join("\n") + "\n";
    std::thread::spawn(move || {
        let _ = stdin.write_all(text.as_bytes());
    });
    child
}

fn finish(mut child: Child) {
    assert!(child.wait().unwrap().success(), "mosquitto_pub succeeded");
}

/// The events of a channel from the events topic, `channel` removed, in arrival order,
/// repeats (the same line again, as QoS 1 and restarts allow) removed.
fn events_of(collector: &Collector, channel: &str) -> (Vec<Value>, usize) {
    let mut seen = std::collections::BTreeSet::new();
    let mut events = Vec::new();
    let mut repeats = 0;
    for payload in collector.on(&format!("steadycal/{channel}/events")) {
        let mut event: Value = serde_json::from_slice(&payload).unwrap();
        assert_eq!(event["channel"], channel);
        event.as_object_mut().unwrap().remove("channel");
        if seen.insert(serde_json::to_string(&event).unwrap()) {
            events.push(event);
        } else {
            repeats += 1;
        }
    }
    (events, repeats)
}

/// The alarm kinds of a retained alarm state.
fn alarm_kinds(state: &Value) -> Vec<String> {
    state["alarms"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a["kind"].as_str().unwrap().to_string())
        .collect()
}

fn summary_alarm_kinds(summary: &Value) -> Vec<String> {
    alarm_kinds(summary)
}

/// The retained messages a late subscriber sees on `topic`.
fn retained(port: u16, topic: &str) -> Value {
    let output = Command::new("mosquitto_sub")
        .args([
            "-h",
            "127.0.0.1",
            "-p",
            &port.to_string(),
            "-t",
            topic,
            "-C",
            "1",
            "-W",
            "5",
        ])
        .output()
        .unwrap();
    assert!(output.status.success(), "a retained message on {topic}");
    serde_json::from_slice(&output.stdout).unwrap()
}

const ROWS: usize = 3000;
const FEEDS: [(&str, &str); 2] = [
    ("cell-a", "gas-cell.csv"),
    ("cell-b", "turbidity-outliers.csv"),
];

#[test]
fn two_channels_at_once_give_the_events_replay_writes() {
    let Some(program) = mosquitto_required("two_channels_at_once_give_the_events_replay_writes")
    else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(program, dir.path());
    let collector = Collector::start(broker.port, "test-collector-1");
    let state = dir.path().join("state");
    let service = watch(&broker.url(), &state, &[]);
    let mut expected = BTreeMap::new();
    let mut publishers = Vec::new();
    for (channel, file) in FEEDS {
        let (csv, payloads) = feed(file, ROWS);
        expected.insert(channel, replay(dir.path(), channel, &csv));
        publishers.push(publish(
            broker.port,
            &format!("plant/{channel}/feed"),
            &payloads,
        ));
    }
    publishers.into_iter().for_each(finish);
    collector.wait_for_samples(&[("cell-a", ROWS as u64), ("cell-b", ROWS as u64)]);
    let stderr = stop_watch(service);
    for (channel, (events, summary)) in &expected {
        let (published, repeats) = events_of(&collector, channel);
        assert!(!events.is_empty(), "the feed raises events");
        assert_eq!(&published, events, "{channel}: events equal replay's");
        assert_eq!(repeats, 0, "{channel}: no repeats without a restart");
        let state = retained(broker.port, &format!("steadycal/{channel}/alarms"));
        assert_eq!(alarm_kinds(&state), summary_alarm_kinds(summary));
        assert_eq!(state["channel"], *channel);
        let status = retained(broker.port, &format!("steadycal/{channel}/status"));
        assert_eq!(status["samples"], ROWS as u64);
        assert_eq!(status["rung"], summary["rung"]);
    }
    assert!(state.join("cell-a.snapshot").is_file(), "{stderr}");
    assert!(stderr.contains("connected to mqtt://127.0.0.1"), "{stderr}");
}

/// Waits until the watch has processed some samples of a part in flight (or the part is
/// through), so that the next interruption falls in the middle of a feed.
fn wait_briefly() {
    std::thread::sleep(Duration::from_millis(150));
}

#[test]
fn broker_and_service_restarts_lose_nothing() {
    let Some(program) = mosquitto_required("broker_and_service_restarts_lose_nothing") else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let mut broker = Broker::start(program, dir.path());
    let collector = Collector::start(broker.port, "test-collector-2");
    let state = dir.path().join("state");
    let mut expected = BTreeMap::new();
    let mut parts: Vec<Vec<(String, Vec<String>)>> = vec![Vec::new(); 4];
    for (channel, file) in FEEDS {
        let (csv, payloads) = feed(file, ROWS);
        expected.insert(channel, replay(dir.path(), channel, &csv));
        for (i, chunk) in payloads.chunks(ROWS / 4).enumerate() {
            parts[i].push((format!("plant/{channel}/feed"), chunk.to_vec()));
        }
    }
    let send = |port: u16, part: &[(String, Vec<String>)]| -> Vec<Child> {
        part.iter()
            .map(|(topic, payloads)| publish(port, topic, payloads))
            .collect()
    };
    // 1. The broker stops (SIGTERM, it saves its sessions) while the watch works through
    //    the first quarter, and comes back on the same port.
    let first = watch(&broker.url(), &state, &[]);
    broker.wait_for_client("steadycal-watch", 1);
    send(broker.port, &parts[0]).into_iter().for_each(finish);
    broker.stop();
    std::thread::sleep(Duration::from_millis(300));
    broker.run();
    broker.wait_for_client("steadycal-watch", 2);
    // The watch has taken the loss and the reconnection in (it works through what came
    // before them first): its statuses say so.
    collector.wait_for_status(|s| s["connection"]["lost"].as_u64() >= Some(1));
    // 2. The watch gets SIGTERM in the middle of the second quarter.
    let publishers = send(broker.port, &parts[1]);
    wait_briefly();
    let first_stderr = stop_watch(first);
    publishers.into_iter().for_each(finish);
    // 3. A second watch resumes, and is killed (SIGKILL) in the middle of the third.
    let mut second = watch(&broker.url(), &state, &[]);
    broker.wait_for_client("steadycal-watch", 3);
    let publishers = send(broker.port, &parts[2]);
    wait_briefly();
    second.kill().unwrap();
    second.wait().unwrap();
    publishers.into_iter().for_each(finish);
    // 4. A third watch resumes and gets the rest.
    let third = watch(&broker.url(), &state, &[]);
    send(broker.port, &parts[3]).into_iter().for_each(finish);
    collector.wait_for_samples(&[("cell-a", ROWS as u64), ("cell-b", ROWS as u64)]);
    let third_stderr = stop_watch(third);
    assert!(
        first_stderr.contains("connection lost") && first_stderr.contains("reconnected"),
        "{first_stderr}"
    );
    assert!(third_stderr.contains("resumed "), "{third_stderr}");
    // On reconnecting the first watch republishes the status of the channels it has.
    let reported = ["cell-a", "cell-b"].iter().any(|channel| {
        collector
            .on(&format!("steadycal/{channel}/status"))
            .iter()
            .map(|p| serde_json::from_slice::<Value>(p).unwrap())
            .any(|s| s["connection"]["lost"].as_u64() >= Some(1))
    });
    assert!(reported, "a status reports the lost connection");
    // The broker's confirmations add up in every status, across the broker's restart and
    // the service's: each publication confirmed at most once, none given up (the broker
    // kept the session).
    let mut statuses = 0;
    for (topic, payload) in collector.seen.lock().unwrap().iter() {
        if !topic.ends_with("/status") {
            continue;
        }
        let link = &serde_json::from_slice::<Value>(payload).unwrap()["connection"];
        let count = |key: &str| link[key].as_u64().unwrap();
        assert!(count("confirmed") <= count("published"), "{link}");
        assert_eq!(
            count("published"),
            count("confirmed") + count("unconfirmed") + count("given_up"),
            "{link}"
        );
        assert_eq!(count("given_up"), 0, "{link}");
        statuses += 1;
    }
    assert!(statuses > 0);
    for (channel, (events, summary)) in &expected {
        let (published, repeats) = events_of(&collector, channel);
        assert_eq!(
            &published, events,
            "{channel}: events equal replay's, repeats removed"
        );
        eprintln!(
            "{channel}: {} events, {repeats} repeated lines",
            events.len()
        );
        let alarms = retained(broker.port, &format!("steadycal/{channel}/alarms"));
        assert_eq!(alarm_kinds(&alarms), summary_alarm_kinds(summary));
        // Since-when survives the restarts: the seq of the event that raised it.
        for alarm in alarms["alarms"].as_array().unwrap() {
            let raised = events
                .iter()
                .find(|e| e["kind"] == alarm["kind"])
                .expect("an event raised the alarm");
            assert_eq!(alarm["since_seq"], raised["seq"], "{channel}: {alarm}");
        }
        let status = retained(broker.port, &format!("steadycal/{channel}/status"));
        assert_eq!(status["samples"], ROWS as u64, "{channel}: {status}");
        assert_eq!(status["rung"], summary["rung"]);
    }
}

#[test]
fn malformed_payloads_are_counted_reported_and_the_channel_goes_on() {
    let Some(program) =
        mosquitto_required("malformed_payloads_are_counted_reported_and_the_channel_goes_on")
    else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(program, dir.path());
    let collector = Collector::start(broker.port, "test-collector-3");
    let service = watch(&broker.url(), &dir.path().join("state"), &[]);
    broker.wait_for_client("steadycal-watch", 1);
    let mega = format!("{{\"t\":9,\"raw\":1,\"pad\":\"{}\"}}", "x".repeat(1 << 20));
    let payloads: Vec<String> = [
        r#"{"t":0,"raw":10,"ref":10}"#,
        "not json",
        r#"{"t":1,"ref":2}"#,
        r#"{"t":2,"raw":"12","ref":12}"#,
        r#"{"t":3,"raw":11,"ref":11}"#,
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    finish(publish(broker.port, "plant/cell-c/feed", &payloads));
    // The 1 MB payload as one message (mosquitto_pub -f), then one more good sample.
    let big = dir.path().join("big.json");
    std::fs::write(&big, &mega).unwrap();
    let status = Command::new("mosquitto_pub")
        .args(["-h", "127.0.0.1", "-p", &broker.port.to_string(), "-q", "1"])
        .args(["-t", "plant/cell-c/feed", "-f"])
        .arg(&big)
        .status()
        .unwrap();
    assert!(status.success());
    finish(publish(
        broker.port,
        "plant/cell-c/feed",
        &[r#"{"t":4,"raw":12,"ref":12}"#.to_string()],
    ));
    collector.wait_for_samples(&[("cell-c", 3)]);
    let stderr = stop_watch(service);
    let reports: Vec<Value> = collector
        .on("steadycal/cell-c/errors")
        .iter()
        .map(|p| serde_json::from_slice(p).unwrap())
        .collect();
    let reasons: Vec<&str> = reports
        .iter()
        .map(|r| r["reason"].as_str().unwrap())
        .collect();
    assert_eq!(reasons.len(), 4, "{reasons:?}");
    assert!(
        reasons[0].starts_with("expected one JSON object per message"),
        "{reasons:?}"
    );
    assert_eq!(reasons[1], "no `raw` field, expected a number");
    assert_eq!(reasons[2], "field `raw`: expected a number, found \"12\"");
    assert!(reasons[3].starts_with("payload of 1048"), "{reasons:?}");
    assert_eq!(reports[3]["malformed"], 4);
    let status = retained(broker.port, "steadycal/cell-c/status");
    assert_eq!(status["malformed"], 4);
    assert_eq!(status["samples"], 3);
    assert!(stderr.contains("malformed payload"), "{stderr}");
}

#[test]
fn channels_beyond_the_cap_are_refused_with_a_message() {
    let Some(program) = mosquitto_required("channels_beyond_the_cap_are_refused_with_a_message")
    else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(program, dir.path());
    let collector = Collector::start(broker.port, "test-collector-4");
    let service = watch(
        &broker.url(),
        &dir.path().join("state"),
        &["--max-channels", "2"],
    );
    broker.wait_for_client("steadycal-watch", 1);
    let samples = |from: u32| -> Vec<String> {
        (from..from + 3)
            .map(|t| format!(r#"{{"t":{t},"raw":{},"ref":{}}}"#, 10 + t, 10 + t))
            .collect()
    };
    finish(publish(broker.port, "plant/cell-x/feed", &samples(0)));
    finish(publish(broker.port, "plant/cell-y/feed", &samples(0)));
    collector.wait_for_samples(&[("cell-x", 3), ("cell-y", 3)]);
    // A third channel is refused, message by message; the two watched go on.
    finish(publish(broker.port, "plant/cell-z/feed", &samples(0)));
    finish(publish(broker.port, "plant/cell-x/feed", &samples(3)));
    collector.wait_for_samples(&[("cell-x", 6), ("cell-y", 3)]);
    let stderr = stop_watch(service);
    let refusals: Vec<Value> = collector
        .on("steadycal/errors")
        .iter()
        .map(|p| serde_json::from_slice(p).unwrap())
        .collect();
    assert_eq!(refusals.len(), 3, "{refusals:?}");
    for (i, refusal) in refusals.iter().enumerate() {
        assert_eq!(refusal["topic"], "plant/cell-z/feed");
        assert_eq!(refusal["refused"], i as u64 + 1);
        assert_eq!(
            refusal["reason"],
            "channel \"cell-z\" refused: 2 channels are watched, the cap (--max-channels)"
        );
    }
    assert!(
        collector.on("steadycal/cell-z/status").is_empty(),
        "no status for a refused channel"
    );
    assert!(
        stderr.contains(
            "refused a message on plant/cell-z/feed (1 refused so far): channel \"cell-z\" refused"
        ),
        "{stderr}"
    );
}

/// Runs the openssl command line (Debian's `openssl`) in `dir`.
fn openssl(dir: &Path, args: &[&str]) {
    let output = Command::new("openssl")
        .args(args)
        .current_dir(dir)
        .output()
        .expect("openssl runs");
    assert!(
        output.status.success(),
        "openssl {args:?}: {}",
        String::from_utf8_lossy(&output.stderr)
    );
}

/// A certificate authority `NAME.pem`/`NAME.key` (EC P-256, one day).
fn authority(dir: &Path, name: &str) {
    openssl(
        dir,
        &[
            "req",
            "-x509",
            "-newkey",
            "ec",
            "-pkeyopt",
            "ec_paramgen_curve:prime256v1",
            "-nodes",
            "-days",
            "1",
            "-subj",
            &format!("/CN={name}"),
            "-addext",
            "basicConstraints=critical,CA:TRUE",
            "-addext",
            "keyUsage=critical,keyCertSign,cRLSign",
            "-keyout",
            &format!("{name}.key"),
            "-out",
            &format!("{name}.pem"),
        ],
    );
}

/// A leaf certificate `NAME.pem`/`NAME.key` signed by the authority `ca`, for `usage`
/// (serverAuth or clientAuth), naming 127.0.0.1 and localhost.
fn leaf(dir: &Path, ca: &str, name: &str, usage: &str) {
    openssl(
        dir,
        &[
            "req",
            "-newkey",
            "ec",
            "-pkeyopt",
            "ec_paramgen_curve:prime256v1",
            "-nodes",
            "-subj",
            &format!("/CN={name}"),
            "-keyout",
            &format!("{name}.key"),
            "-out",
            &format!("{name}.csr"),
        ],
    );
    std::fs::write(
        dir.join(format!("{name}.ext")),
        format!("basicConstraints=CA:FALSE\nsubjectAltName=IP:127.0.0.1,DNS:localhost\nextendedKeyUsage={usage}\n"),
    )
    .unwrap();
    openssl(
        dir,
        &[
            "x509",
            "-req",
            "-in",
            &format!("{name}.csr"),
            "-CA",
            &format!("{ca}.pem"),
            "-CAkey",
            &format!("{ca}.key"),
            "-CAcreateserial",
            "-days",
            "1",
            "-extfile",
            &format!("{name}.ext"),
            "-out",
            &format!("{name}.pem"),
        ],
    );
}

#[test]
fn mqtts_with_an_authority_file_and_a_client_certificate() {
    let Some(program) = mosquitto_required("mqtts_with_an_authority_file_and_a_client_certificate")
    else {
        return;
    };
    let has_openssl = Command::new("openssl").arg("version").output().is_ok();
    if !has_openssl {
        assert!(
            std::env::var("STEADYCAL_REQUIRE_MOSQUITTO").as_deref() != Ok("1"),
            "openssl is required with mosquitto (apt-get install openssl)"
        );
        eprintln!("SKIPPED mqtts test: openssl not installed");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let pki = dir.path().join("pki");
    std::fs::create_dir_all(&pki).unwrap();
    authority(&pki, "ca");
    authority(&pki, "other-ca");
    leaf(&pki, "ca", "broker", "serverAuth");
    leaf(&pki, "ca", "sensor-gateway", "clientAuth");
    // The plain listener serves the test's publisher and collector; the TLS one requires
    // a client certificate from the same authority.
    let tls_port = free_port();
    let file = |name: &str| pki.join(name).display().to_string();
    let extra = format!(
        "listener {tls_port} 127.0.0.1\ncafile {}\ncertfile {}\nkeyfile {}\nrequire_certificate true\n",
        file("ca.pem"),
        file("broker.pem"),
        file("broker.key")
    );
    let broker = Broker::start_with(program, dir.path(), &extra);
    let collector = Collector::start(broker.port, "test-collector-5");
    let url = format!("mqtts://127.0.0.1:{tls_port}");
    let service = watch(
        &url,
        &dir.path().join("state"),
        &[
            "--trust-ca",
            &file("ca.pem"),
            "--client-cert",
            &file("sensor-gateway.pem"),
            "--client-key",
            &file("sensor-gateway.key"),
        ],
    );
    // Refused: a broker certificate from an authority not trusted, and no client
    // certificate where the broker requires one.
    let untrusted = watch(
        &url,
        &dir.path().join("state-untrusted"),
        &[
            "--trust-ca",
            &file("other-ca.pem"),
            "--session-id",
            "untrusted",
        ],
    );
    let anonymous = watch(
        &url,
        &dir.path().join("state-anonymous"),
        &["--trust-ca", &file("ca.pem"), "--session-id", "anonymous"],
    );
    broker.wait_for_client("steadycal-watch", 1);
    let (csv, payloads) = feed("turbidity-outliers.csv", 600);
    let (events, _) = replay(dir.path(), "cell-t", &csv);
    finish(publish(broker.port, "plant/cell-t/feed", &payloads));
    collector.wait_for_samples(&[("cell-t", 600)]);
    let stderr = stop_watch(service);
    assert!(stderr.contains(&format!("connected to {url}")), "{stderr}");
    let (published, repeats) = events_of(&collector, "cell-t");
    assert_eq!(published, events, "events over TLS equal replay's");
    assert_eq!(repeats, 0);
    // Refused and stopped by SIGTERM: the exit status of a clean stop, and why it never
    // connected as the last word.
    for child in [untrusted, anonymous] {
        let refused = stop_watch(child);
        assert!(refused.contains("connection lost or refused"), "{refused}");
        let last = refused.lines().last().unwrap_or_default();
        let prefix = format!("steadycal: stopped without ever connecting to {url}: ");
        let reason = last.strip_prefix(&prefix).expect(&refused);
        assert!(
            refused.contains(&format!("connection lost or refused ({reason})")),
            "{refused}"
        );
    }
}

#[test]
fn a_topic_level_with_a_quote_or_a_backslash_is_refused_and_reported() {
    let Some(program) =
        mosquitto_required("a_topic_level_with_a_quote_or_a_backslash_is_refused_and_reported")
    else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(program, dir.path());
    let collector = Collector::start(broker.port, "test-collector-6");
    let service = watch(&broker.url(), &dir.path().join("state"), &[]);
    broker.wait_for_client("steadycal-watch", 1);
    let odd = r#"plant/cell"7\b/feed"#;
    let sample = vec![r#"{"t":0,"raw":10,"ref":10}"#.to_string()];
    finish(publish(broker.port, odd, &sample));
    finish(publish(broker.port, "plant/cell-7/feed", &sample));
    collector.wait_for_samples(&[("cell-7", 1)]);
    let until = Instant::now() + DEADLINE;
    while collector.on("steadycal/errors").is_empty() {
        assert!(Instant::now() < until, "a refusal within {DEADLINE:?}");
        std::thread::sleep(Duration::from_millis(20));
    }
    let stderr = stop_watch(service);
    let refusals = collector.on("steadycal/errors");
    assert_eq!(refusals.len(), 1);
    let refusal: Value = serde_json::from_slice(&refusals[0]).unwrap();
    assert_eq!(refusal["topic"], odd, "the topic round-trips");
    assert_eq!(
        refusal["reason"],
        r#"channel "cell\"7\\b": expected 1 to 64 letters, digits, '.', '_' or '-', not starting with '.'"#
    );
    // Nothing is published under a topic with the name; the good channel's events carry
    // its name.
    let seen = collector.seen.lock().unwrap();
    assert!(
        seen.iter().all(|(topic, _)| !topic.contains('"')),
        "{stderr}"
    );
}

#[test]
fn stopped_before_any_connection_it_exits_cleanly_and_says_why() {
    // No broker needed: nothing listens on the port.
    let dir = tempfile::tempdir().unwrap();
    let url = format!("mqtt://127.0.0.1:{}", free_port());
    let child = watch(&url, &dir.path().join("state"), &[]);
    // Past the first attempts (0.1 s, 0.2 s, 0.4 s apart), into a wait between two.
    std::thread::sleep(Duration::from_millis(1200));
    let stderr = stop_watch(child);
    assert!(
        stderr.contains("connection lost or refused (I/O: Connection refused"),
        "{stderr}"
    );
    assert_eq!(
        stderr.lines().last().unwrap_or_default(),
        format!("steadycal: stopped without ever connecting to {url}: I/O: Connection refused (os error 111)"),
        "{stderr}"
    );
}
