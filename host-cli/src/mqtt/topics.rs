//! Topics: which channel a sample topic names, and the topics steadycal publishes on.
//!
//! A sample topic's channel is the level matched by the first `+` of the filter it
//! matched (`plant/+/feed` and `plant/cell-7/feed` give `cell-7`); a filter without `+`
//! leaves the channel to the payload. Channel names are 1 to 64 letters, digits, `.`, `_`
//! or `-`, not starting with `.`, so that a name is one topic level and one file name.
//!
//! Published, under the prefix (`steadycal` unless `--publish-prefix` says otherwise):
//! `PREFIX/CHANNEL/events` (event lines, QoS 1), `PREFIX/CHANNEL/alarms` (retained alarm
//! state), `PREFIX/CHANNEL/status` (retained status), `PREFIX/CHANNEL/errors` (malformed
//! payloads of the channel) and `PREFIX/errors` (messages no channel could take).

/// What a publication is about, below the prefix.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Output {
    /// Event lines.
    Events,
    /// The retained alarm state.
    Alarms,
    /// The retained status.
    Status,
    /// Malformed payloads of the channel.
    Errors,
}

impl Output {
    /// The topic level.
    pub fn level(self) -> &'static str {
        match self {
            Output::Events => "events",
            Output::Alarms => "alarms",
            Output::Status => "status",
            Output::Errors => "errors",
        }
    }
}

/// The subscription filters and the publish prefix.
#[derive(Clone, Debug)]
pub struct Topics {
    filters: Vec<(String, Option<usize>)>,
    prefix: String,
}

impl Topics {
    /// Checks the filters (MQTT filter syntax) and the prefix (a topic without wildcards).
    pub fn new(filters: &[String], prefix: &str) -> Result<Self, String> {
        if prefix.is_empty() || !rumqttc::valid_topic(prefix) || prefix.ends_with('/') {
            return Err(format!(
                "--publish-prefix {prefix:?}: expected a topic without `+`, `#` or a trailing `/`"
            ));
        }
        let mut checked = Vec::new();
        for filter in filters {
            if filter.is_empty() || !rumqttc::valid_filter(filter) {
                return Err(format!(
                    "--topic {filter:?}: not an MQTT topic filter (`+` and `#` must fill a whole level, `#` only last)"
                ));
            }
            let level = filter.split('/').position(|level| level == "+");
            checked.push((filter.clone(), level));
        }
        Ok(Topics {
            filters: checked,
            prefix: prefix.to_string(),
        })
    }

    /// The filters to subscribe to.
    pub fn filters(&self) -> impl Iterator<Item = &str> {
        self.filters.iter().map(|(f, _)| f.as_str())
    }

    /// True when `topic` is one steadycal publishes on (never read as samples, even when
    /// a filter such as `#` matches it).
    pub fn is_own(&self, topic: &str) -> bool {
        topic
            .strip_prefix(self.prefix.as_str())
            .is_some_and(|rest| rest.starts_with('/'))
    }

    /// The channel the topic names: `Some(Some(name))` from the `+` level of the first
    /// matching filter, `Some(None)` when the matching filter has no `+`, `None` when no
    /// filter matches.
    pub fn channel_of<'a>(&self, topic: &'a str) -> Option<Option<&'a str>> {
        let (_, level) = self
            .filters
            .iter()
            .find(|(filter, _)| rumqttc::matches(topic, filter))?;
        Some(level.and_then(|index| topic.split('/').nth(index)))
    }

    /// The topic of a channel's output.
    pub fn output(&self, channel: &str, what: Output) -> String {
        format!("{}/{channel}/{}", self.prefix, what.level())
    }

    /// The topic of messages no channel could take.
    pub fn refused(&self) -> String {
        format!("{}/errors", self.prefix)
    }
}

/// True when `name` can be a channel: 1 to 64 of `[A-Za-z0-9._-]`, not starting with `.`.
pub fn valid_channel(name: &str) -> bool {
    (1..=64).contains(&name.len())
        && !name.starts_with('.')
        && name
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'.' | b'_' | b'-'))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn channel_from_the_plus_level() {
        let topics =
            Topics::new(&["plant/+/feed".into(), "lab/bench".into()], "steadycal").unwrap();
        assert_eq!(topics.channel_of("plant/cell-7/feed"), Some(Some("cell-7")));
        assert_eq!(topics.channel_of("lab/bench"), Some(None));
        assert_eq!(topics.channel_of("plant/cell-7/other"), None);
        assert_eq!(
            topics.output("cell-7", Output::Alarms),
            "steadycal/cell-7/alarms"
        );
        assert!(topics.is_own("steadycal/cell-7/events"));
        assert!(!topics.is_own("steadycalx/cell-7/events"));
    }

    #[test]
    fn filters_and_names_are_checked() {
        assert!(Topics::new(&["a/b+/c".into()], "p").is_err());
        assert!(Topics::new(&["a/#/c".into()], "p").is_err());
        assert!(Topics::new(&["a/+".into()], "p/+").is_err());
        assert!(valid_channel("cell-7.a_b"));
        assert!(!valid_channel(".hidden"));
        assert!(!valid_channel("a b"));
        assert!(!valid_channel(""));
        assert!(!valid_channel(&"x".repeat(65)));
    }
}
