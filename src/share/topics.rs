//! The topics of a shared run, all under one prefix (`--share-topic`,
//! default `termvel`):
//!
//! | topic | what | QoS | retained |
//! |---|---|---|---|
//! | `PREFIX/description` | the run: vehicle, track, signal map, config, start, version | 1 | yes |
//! | `PREFIX/status` | the publisher: `online`, `ended`, or `offline` (its last will) | 1 | yes |
//! | `PREFIX/snapshot` | every snapshot (latest wins) | 0 | no |
//! | `PREFIX/alerts` | the present alert state (every alert shown) | 1 | yes |
//! | `PREFIX/alerts/change` | one alert raised, cleared or acknowledged | 1 | no |
//! | `PREFIX/marks` | operator marks | 1 | no |
//! | `PREFIX/health` | source health (links, rates, losses), once a second | 1 | yes |
//! | `PREFIX/events` | raw event batches every 100 ms of stream time (`--share-events`) | 1 | no |
//! | `PREFIX/control/USERNAME` | a follower's acknowledgement or mark ([`super::control`]); read only with `--share-accept-control` | 1 | no |
//! | `PREFIX/answers/USERNAME` | the reading station's answer to each control message: accepted or refused, and why | 1 | no |
//!
//! The last level of a control topic is the sender's username: a broker
//! whose ACL has `pattern write PREFIX/control/%u` guarantees it, so the
//! reading station takes the sender from the topic, never from the payload.

/// Why a topic prefix is refused.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum TopicError {
    /// Empty, or ends or starts with '/', or has an empty level.
    #[error("topic prefix \"{0}\": empty levels are not allowed (e.g. team/run1)")]
    Empty(String),
    /// `+` and `#` are for subscribing, not publishing; `$` topics belong to the broker.
    #[error("topic prefix \"{0}\": '+', '#' and a leading '$' are not allowed")]
    Wildcard(String),
    /// Control characters, or over the length limit.
    #[error("topic prefix: control characters or over {MAX_PREFIX} bytes")]
    Unprintable,
}

/// The longest prefix accepted (MQTT allows 65535 for the whole topic).
pub const MAX_PREFIX: usize = 200;

/// The topics under one prefix.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Topics {
    prefix: String,
}

impl Topics {
    pub fn new(prefix: &str) -> Result<Topics, TopicError> {
        if prefix.len() > MAX_PREFIX || prefix.chars().any(char::is_control) {
            return Err(TopicError::Unprintable);
        }
        if prefix.is_empty() || prefix.split('/').any(str::is_empty) {
            return Err(TopicError::Empty(prefix.to_string()));
        }
        if prefix.contains(['+', '#']) || prefix.starts_with('$') {
            return Err(TopicError::Wildcard(prefix.to_string()));
        }
        Ok(Topics { prefix: prefix.to_string() })
    }

    pub fn prefix(&self) -> &str {
        &self.prefix
    }

    fn at(&self, leaf: &str) -> String {
        format!("{}/{leaf}", self.prefix)
    }

    pub fn description(&self) -> String {
        self.at("description")
    }
    pub fn status(&self) -> String {
        self.at("status")
    }
    pub fn snapshot(&self) -> String {
        self.at("snapshot")
    }
    pub fn alerts(&self) -> String {
        self.at("alerts")
    }
    pub fn alert_change(&self) -> String {
        self.at("alerts/change")
    }
    pub fn marks(&self) -> String {
        self.at("marks")
    }
    pub fn health(&self) -> String {
        self.at("health")
    }
    pub fn events(&self) -> String {
        self.at("events")
    }
    /// Where `user` sends acknowledgements and marks.
    pub fn control(&self, user: &str) -> String {
        format!("{}/control/{user}", self.prefix)
    }
    /// Every sender's control topic, for the reading station's subscription.
    pub fn control_all(&self) -> String {
        self.at("control/+")
    }
    /// The sender of a message on a control topic (its last level), or
    /// `None` when `topic` is not one.
    pub fn control_sender<'t>(&self, topic: &'t str) -> Option<&'t str> {
        topic.strip_prefix(self.prefix.as_str())?.strip_prefix("/control/")
    }
    /// Where the reading station answers `user`'s control messages.
    pub fn answers(&self, user: &str) -> String {
        format!("{}/answers/{user}", self.prefix)
    }
    /// Every topic of the run, for a follower's subscription.
    pub fn all(&self) -> String {
        self.at("#")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes() {
        let t = Topics::new("team/run1").unwrap();
        assert_eq!(t.snapshot(), "team/run1/snapshot");
        assert_eq!(t.alert_change(), "team/run1/alerts/change");
        assert_eq!(t.all(), "team/run1/#");
        assert_eq!(t.control("pit-eng"), "team/run1/control/pit-eng");
        assert_eq!(t.control_all(), "team/run1/control/+");
        assert_eq!(t.control_sender("team/run1/control/pit-eng"), Some("pit-eng"));
        assert_eq!(t.control_sender("team/run1/snapshot"), None);
        assert_eq!(t.control_sender("team/run10/control/x"), None, "another prefix");
        assert_eq!(t.answers("pit-eng"), "team/run1/answers/pit-eng");
        for bad in ["", "/a", "a/", "a//b", "a/+", "a/#", "$SYS", "a\u{1b}[2J"] {
            assert!(Topics::new(bad).is_err(), "{bad:?}");
        }
    }
}
