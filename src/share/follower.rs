//! Following a shared run: subscribe to every topic under the prefix,
//! check each message ([`payload::check`]) and hand on what passes. The
//! command (`termvel follow`) prints or draws it; this counts what came,
//! what was refused and how late the snapshots were.

use std::future::Future;
use std::time::Duration;

use rumqttc::{AsyncClient, ConnectionError, Event, Packet, QoS};
use serde_json::{Value, json};

use super::broker::{BrokerError, BrokerUrl};
use super::credentials::Credentials;
use super::payload::{self, Kind};
use super::publisher::{BACKOFF_FIRST, BACKOFF_MAX, describe, unix_ns};
use super::topics::Topics;

/// Why following stopped with an error.
#[derive(Debug, thiserror::Error)]
pub enum FollowError {
    /// The broker's options (URL, TLS files).
    #[error(transparent)]
    Broker(#[from] BrokerError),
    /// The broker refused us (username, password, certificate): retrying
    /// would not help.
    #[error("{url}: {why}")]
    Refused { url: String, why: String },
}

/// What to follow.
pub struct FollowSettings {
    pub url: BrokerUrl,
    pub topics: Topics,
    pub credentials: Option<Credentials>,
    /// The TLS files for `mqtts://` (CA, client certificate and key).
    pub tls: super::broker::TlsFiles,
    /// Say link changes on stderr.
    pub say_on_stderr: bool,
    /// Messages to publish (topic, payload): a follower's acknowledgements
    /// and marks ([`super::control`]); `None` sends nothing.
    pub outgoing: Option<tokio::sync::mpsc::Receiver<(String, Vec<u8>)>>,
}

/// One accepted message.
pub struct Received<'a> {
    pub kind: Kind,
    pub value: &'a Value,
    /// Delivered from the broker's store on subscribing (not live).
    pub retained: bool,
}

/// What a follower saw.
#[derive(Debug, Default)]
pub struct FollowReport {
    /// Accepted messages, by kind.
    pub by_kind: std::collections::BTreeMap<&'static str, u64>,
    /// Messages refused (size, JSON, schema, kind, control characters).
    pub refused: u64,
    /// The first refusals' reasons.
    pub refusals: Vec<String>,
    /// Times the link was lost.
    pub link_losses: u64,
    /// The publisher said the run ended.
    pub ended: bool,
    /// Publish-to-receive latency of snapshots, µs (wall clocks of both ends).
    pub latency_us: Vec<u64>,
}

impl FollowReport {
    pub fn json(&self) -> Value {
        let mut lat = self.latency_us.clone();
        lat.sort_unstable();
        let q = |p: f64| lat.get(((lat.len() as f64 - 1.0) * p).round() as usize).copied();
        json!({
            "messages": self.by_kind,
            "refused": self.refused,
            "link_losses": self.link_losses,
            "ended": self.ended,
            "latency_us": if lat.is_empty() { Value::Null } else {
                json!({ "count": lat.len(), "p50": q(0.5), "p99": q(0.99), "max": lat.last() })
            },
        })
    }
}

/// Follows until `stop` resolves or the publisher says (live, not from the
/// store) that the run ended. `ready` is called once subscribed.
pub async fn follow(
    settings: FollowSettings,
    ready: impl FnMut(),
    on_message: impl FnMut(Received<'_>),
    stop: impl Future<Output = ()>,
) -> Result<FollowReport, FollowError> {
    follow_with_link(settings, ready, |_| {}, on_message, stop).await
}

/// As [`follow`], telling `on_link` each time the link to the broker comes
/// up (`true`) or goes down (`false`), for a screen that shows it.
pub async fn follow_with_link(
    settings: FollowSettings,
    mut ready: impl FnMut(),
    mut on_link: impl FnMut(bool),
    mut on_message: impl FnMut(Received<'_>),
    stop: impl Future<Output = ()>,
) -> Result<FollowReport, FollowError> {
    // Unique within the process too: the broker drops the older of two
    // clients with one id (several followers in one process, as in a bench).
    static FOLLOWERS: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
    let n = FOLLOWERS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let client_id = format!("termvel-follow-{}-{n}", std::process::id());
    let options = settings.url.options(&client_id, settings.credentials.as_ref(), &settings.tls)?;
    let (client, mut eventloop) = AsyncClient::new(options, 16);
    eventloop.set_network_options(super::broker::network_options());
    let mut report = FollowReport::default();
    let mut backoff = BACKOFF_FIRST;
    let mut ever_connected = false;
    let mut told_ready = false;
    let mut outgoing = settings.outgoing;
    tokio::pin!(stop);
    loop {
        let ev = tokio::select! {
            _ = &mut stop => break,
            ev = eventloop.poll() => ev,
            out = async { outgoing.as_mut().expect("guarded").recv().await }, if outgoing.is_some() => {
                match out {
                    // QoS 1: the broker takes it (an MQTT 3.1.1 broker says
                    // nothing when its ACL then drops it: the answer says).
                    // Never waits: the event loop is not polled meanwhile.
                    Some((topic, body)) => {
                        if client.try_publish(topic, QoS::AtLeastOnce, false, body).is_err() && settings.say_on_stderr {
                            crate::say!("termvel: a control message could not be queued (the link is busy)");
                        }
                    }
                    None => outgoing = None,
                }
                continue;
            }
        };
        match ev {
            Ok(Event::Incoming(Packet::ConnAck(_))) => {
                backoff = BACKOFF_FIRST;
                if ever_connected && settings.say_on_stderr {
                    crate::say!("termvel: follow link up again ({})", settings.url.display());
                }
                ever_connected = true;
                on_link(true);
                // Clean sessions: subscribe on every connection.
                let _ = client.try_subscribe(settings.topics.all(), QoS::AtLeastOnce);
            }
            Ok(Event::Incoming(Packet::SubAck(_))) => {
                if !told_ready {
                    told_ready = true;
                    ready();
                }
            }
            // Other followers' control messages are the reading station's to check.
            Ok(Event::Incoming(Packet::Publish(p))) if settings.topics.control_sender(&p.topic).is_some() => {}
            Ok(Event::Incoming(Packet::Publish(p))) => match payload::check(&p.payload) {
                Ok((kind, value)) => {
                    *report.by_kind.entry(kind.as_str()).or_default() += 1;
                    if kind == Kind::Snapshot
                        && let Some(sent) = value.get("sent_unix_ns").and_then(Value::as_i64)
                    {
                        report.latency_us.push(((unix_ns() - sent).max(0) / 1000) as u64);
                    }
                    let ended = kind == Kind::Status && !p.retain && value["state"] == "ended";
                    on_message(Received { kind, value: &value, retained: p.retain });
                    if ended {
                        report.ended = true;
                        break;
                    }
                }
                Err(e) => {
                    report.refused += 1;
                    if report.refusals.len() < 10 {
                        report.refusals.push(format!("{}: {e}", crate::printable::printable(&p.topic)));
                    }
                }
            },
            Ok(_) => {}
            Err(e) => {
                let why = describe(&e);
                // Refused, or a certificate problem: retrying would not help.
                if matches!(e, ConnectionError::ConnectionRefused(_))
                    || super::broker::certificate_problem(&e).is_some()
                {
                    return Err(FollowError::Refused { url: settings.url.display(), why });
                }
                report.link_losses += 1;
                on_link(false);
                if settings.say_on_stderr {
                    crate::say!("termvel: follow link down ({}: {why}); retrying", settings.url.display());
                }
                tokio::select! {
                    _ = &mut stop => break,
                    _ = tokio::time::sleep(backoff) => {}
                }
                backoff = (backoff * 2).min(BACKOFF_MAX);
            }
        }
    }
    let _ = client.try_disconnect();
    let _ = tokio::time::timeout(Duration::from_millis(200), eventloop.poll()).await;
    Ok(report)
}
