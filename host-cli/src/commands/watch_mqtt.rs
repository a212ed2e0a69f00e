//! The options of `watch` for an MQTT broker (`--mqtt URL` and the rest), as clap reads
//! them; [`MqttArgs::options`] hands them to the service as [`WatchOptions`].

use std::path::PathBuf;

use clap::Args;

use crate::mqtt::options::{PayloadKind, WatchOptions};

/// Options of `watch` for an MQTT broker.
#[derive(Args, Debug, Clone)]
pub struct MqttArgs {
    /// Read samples from an MQTT broker instead of a line stream:
    /// mqtt://[USER[:PASSWORD]@]HOST[:PORT] (port 1883) or mqtts://... (TLS, port 8883).
    /// USER and PASSWORD can come from STEADYCAL_MQTT_USER and STEADYCAL_MQTT_PASSWORD instead.
    #[arg(long, value_name = "URL")]
    pub mqtt: Option<String>,
    /// Topic filter of sample messages (repeatable); the level under the first `+` names
    /// the channel (`plant/+/feed`), else the payload's `channel` field does.
    #[arg(long = "topic", value_name = "FILTER", requires = "mqtt")]
    pub topics: Vec<String>,
    /// How sample payloads are written.
    #[arg(long, value_enum, default_value = "json", requires = "mqtt")]
    pub payload: PayloadKind,
    /// Header of CSV payloads: the column names in order (`t,raw,ref`).
    #[arg(long, value_name = "NAMES", requires = "mqtt")]
    pub columns: Option<String>,
    /// First topic level of everything steadycal publishes.
    #[arg(long, value_name = "TOPIC", default_value = "steadycal")]
    pub publish_prefix: String,
    /// Directory of the channels' snapshots: saved there, resumed from there on start.
    #[arg(long, value_name = "DIR", requires = "mqtt")]
    pub state_dir: Option<PathBuf>,
    /// Save a channel's snapshot at least every N checks.
    #[arg(long, value_name = "N", default_value_t = 100)]
    pub save_every: u64,
    /// Acknowledge samples to the broker, after saving the state, at the latest when this
    /// many are waiting (at most the broker's in-flight limit, 20 in mosquitto).
    #[arg(long, value_name = "N", default_value_t = 16)]
    pub ack_window: usize,
    /// Publish a channel's retained status every N checks.
    #[arg(long, value_name = "N", default_value_t = 100)]
    pub status_every: u64,
    /// And every S seconds for every channel.
    #[arg(long, value_name = "S", default_value_t = 60)]
    pub status_seconds: u64,
    /// The most channels watched at once; samples of further channels are refused with a
    /// message.
    #[arg(long, value_name = "N", default_value_t = 256)]
    pub max_channels: usize,
    /// Largest sample payload read, in bytes; a longer one is counted as malformed.
    #[arg(long, value_name = "BYTES", default_value_t = 65_536)]
    pub max_payload: usize,
    /// Client id of the persistent session (keep it fixed so a restart finds its session).
    #[arg(long, value_name = "ID", default_value = "steadycal-watch")]
    pub session_id: String,
    /// PEM file of the certificate authorities trusted for mqtts://.
    #[arg(long, value_name = "FILE")]
    pub trust_ca: Option<PathBuf>,
    /// PEM certificate presented to the broker (with --client-key).
    #[arg(long, value_name = "FILE", requires = "client_key")]
    pub client_cert: Option<PathBuf>,
    /// PEM private key of --client-cert.
    #[arg(long, value_name = "FILE", requires = "client_cert")]
    pub client_key: Option<PathBuf>,
}

impl MqttArgs {
    /// The options of the service for the broker `url`.
    pub fn options(&self, url: &str) -> WatchOptions {
        WatchOptions {
            url: url.to_string(),
            topics: self.topics.clone(),
            payload: self.payload,
            columns: self.columns.clone(),
            publish_prefix: self.publish_prefix.clone(),
            state_dir: self.state_dir.clone(),
            save_every: self.save_every,
            ack_window: self.ack_window,
            status_every: self.status_every,
            status_seconds: self.status_seconds,
            max_channels: self.max_channels,
            max_payload: self.max_payload,
            session_id: self.session_id.clone(),
            trust_ca: self.trust_ca.clone(),
            client_cert: self.client_cert.clone(),
            client_key: self.client_key.clone(),
        }
    }
}
