//! The JSON payloads of a shared run: one object per MQTT message, each
//! with `schema` (the version of this layout, [`SCHEMA`]) and `kind` (which
//! of the layouts below). Other tools (a dashboard, a script) read these,
//! so they are documented in the README ("Sharing a run"); a change that
//! breaks a reader raises [`SCHEMA`].
//!
//! Snapshots reuse the headless JSON ([`crate::headless::snapshot_json`]),
//! so a follower's snapshot is the publisher's headless line, byte for byte.

use serde_json::{Value, json};

use crate::config::ConfigSet;
use crate::engine::snapshot::SourceView;
use crate::engine::{Alert, Snapshot};
use crate::event::TimeNs;
use crate::headless::{alert_json, snapshot_json};

/// The version of the payload layouts.
pub const SCHEMA: u64 = 1;

/// The largest payload published or accepted (a snapshot with a large
/// signal map is tens of kilobytes; the description carries the config).
pub const MAX_PAYLOAD_BYTES: usize = 1 << 20;

/// The kinds of payload, each on its own topic ([`super::topics`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    Description,
    Status,
    Snapshot,
    Alerts,
    AlertChange,
    Mark,
    Health,
    Events,
    /// The reading station's answer to a follower's control message
    /// ([`super::requests::answer`]).
    ControlAnswer,
}

impl Kind {
    pub const ALL: [Kind; 9] = [
        Kind::Description,
        Kind::Status,
        Kind::Snapshot,
        Kind::Alerts,
        Kind::AlertChange,
        Kind::Mark,
        Kind::Health,
        Kind::Events,
        Kind::ControlAnswer,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            Kind::Description => "description",
            Kind::Status => "status",
            Kind::Snapshot => "snapshot",
            Kind::Alerts => "alerts",
            Kind::AlertChange => "alert_change",
            Kind::Mark => "mark",
            Kind::Health => "health",
            Kind::Events => "events",
            Kind::ControlAnswer => "control_answer",
        }
    }

    pub fn parse(s: &str) -> Option<Kind> {
        Kind::ALL.into_iter().find(|k| k.as_str() == s)
    }
}

fn envelope(kind: Kind, mut body: serde_json::Map<String, Value>) -> Value {
    body.insert("schema".into(), json!(SCHEMA));
    body.insert("kind".into(), json!(kind.as_str()));
    Value::Object(body)
}

fn object(v: Value) -> serde_json::Map<String, Value> {
    match v {
        Value::Object(m) => m,
        _ => serde_json::Map::new(),
    }
}

/// What a late follower needs to draw: the run's vehicle, track, signal
/// map and config texts, when it started, and who published it.
pub struct RunDescription<'a> {
    pub config: &'a ConfigSet,
    /// `live`, `rehearse` or `replay`.
    pub command: &'a str,
    /// Wall-clock start, Unix ns.
    pub started_unix_ns: i64,
    /// Stream time between snapshots.
    pub snapshot_every_ns: TimeNs,
    /// The run's sources, in id order (the names the event lines use).
    pub sources: &'a crate::event::SourceTable,
}

/// The retained description of the run.
pub fn description(d: &RunDescription) -> Value {
    let c = d.config;
    let messages: Vec<Value> = c
        .signals
        .messages
        .iter()
        .map(|m| {
            json!({
                "id": m.id.raw(),
                "name": m.name,
                "period_s": m.period_ns as f64 * 1e-9,
                "signals": m.signals.iter().map(|s| json!({
                    "name": s.name,
                    "channel": s.channel,
                    "unit": s.unit_name,
                })).collect::<Vec<_>>(),
            })
        })
        .collect();
    let texts: Vec<Value> =
        c.texts.iter().map(|t| json!({ "kind": t.kind.as_str(), "origin": t.origin, "text": t.text })).collect();
    envelope(
        Kind::Description,
        object(json!({
            "termvel_version": env!("CARGO_PKG_VERSION"),
            "command": d.command,
            "started_unix_ns": d.started_unix_ns,
            "started_utc": crate::civil_time::utc_iso(d.started_unix_ns.div_euclid(1_000_000_000)),
            "snapshot_every_s": d.snapshot_every_ns as f64 * 1e-9,
            "vehicle": c.vehicle.name,
            "track": c.track.name,
            "signal_map": { "bitrate": c.signals.bitrate, "messages": messages },
            "config": texts,
            "sources": d.sources.iter().map(|(id, s)| json!({ "id": id.0, "name": s.name, "kind": s.kind.as_str() })).collect::<Vec<_>>(),
        })),
    )
}

/// The publisher's state: `online`, `ended` (the run finished) or
/// `offline` (its last will: the broker lost it).
pub fn status(state: &str) -> Value {
    envelope(Kind::Status, object(json!({ "state": state })))
}

/// One snapshot, `seq` counting from 1 over the run (a follower sees gaps).
pub fn snapshot(seq: u64, s: &Snapshot) -> Value {
    envelope(Kind::Snapshot, object(json!({ "seq": seq, "snapshot": snapshot_json(s) })))
}

/// The present alert state (retained): every alert shown, newest first.
pub fn alerts(t_ns: TimeNs, alerts: &[Alert]) -> Value {
    envelope(
        Kind::Alerts,
        object(json!({ "t": t_ns as f64 * 1e-9, "alerts": alerts.iter().map(alert_json).collect::<Vec<_>>() })),
    )
}

/// One alert's change: `raised`, `cleared`, `acked`, or `gone` (no longer shown).
pub fn alert_change(t_ns: TimeNs, change: &str, a: &Alert) -> Value {
    envelope(Kind::AlertChange, object(json!({ "t": t_ns as f64 * 1e-9, "change": change, "alert": alert_json(a) })))
}

/// Operator marks: how many so far, as of `t_ns`.
pub fn mark(t_ns: TimeNs, count: usize) -> Value {
    envelope(Kind::Mark, object(json!({ "t": t_ns as f64 * 1e-9, "count": count })))
}

/// Source health as of `t_ns`.
pub fn health(t_ns: TimeNs, sources: &[SourceView]) -> Value {
    let list: Vec<Value> = sources
        .iter()
        .map(|s| {
            json!({
                "name": s.name,
                "kind": s.kind.as_str(),
                "events": s.events,
                "rate_per_s": if s.rate_per_s.is_finite() { json!(s.rate_per_s) } else { Value::Null },
                "gaps": s.gaps,
                "parse_errors": s.parse_errors,
                "last_error": s.last_error,
                "link": s.link.map(|l| l.as_str()),
                "age_s": s.age_s.filter(|a| a.is_finite()),
                "error_frames": s.error_frames,
                "lost": s.lost,
            })
        })
        .collect();
    envelope(Kind::Health, object(json!({ "t": t_ns as f64 * 1e-9, "sources": list })))
}

/// A batch of raw events (`--share-events`): `seq` counts batches from 1
/// (a gap is a batch lost), `events_before` the events of the batches
/// before it (so a follower knows how many it missed), and `lines` the
/// events as recording lines ("The recording format"), joined by line ends.
pub fn events(
    seq: u64,
    events_before: u64,
    events: &[crate::event::Event],
    sources: &crate::event::SourceTable,
) -> Value {
    let mut bytes = Vec::with_capacity(events.len() * 40);
    for ev in events {
        crate::record::writer::format_event(&mut bytes, ev, sources.name(ev.source));
    }
    envelope(
        Kind::Events,
        object(json!({
            "seq": seq,
            "events_before": events_before,
            "count": events.len(),
            "first_t_ns": events.first().map(|e| e.t_ns),
            "lines": String::from_utf8_lossy(&bytes),
        })),
    )
}

/// Why a received payload is refused.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum PayloadError {
    /// Over [`MAX_PAYLOAD_BYTES`].
    #[error("payload of {0} bytes is over the limit")]
    TooLarge(usize),
    /// Not UTF-8 JSON, or not an object.
    #[error("payload is not a JSON object: {0}")]
    NotJson(String),
    /// `schema` missing or not this version.
    #[error("payload schema {0} is not {SCHEMA}")]
    Schema(String),
    /// `kind` missing or unknown.
    #[error("payload kind {0} is unknown")]
    Kind(String),
    /// A string holds an escape sequence or other control character.
    #[error("payload holds a control character (an escape sequence?)")]
    Control,
}

/// Checks a received payload: size, JSON object, schema, kind, and no
/// control characters in any string but line breaks and tabs (config texts
/// have them). Returns its kind and value.
pub fn check(bytes: &[u8]) -> Result<(Kind, Value), PayloadError> {
    if bytes.len() > MAX_PAYLOAD_BYTES {
        return Err(PayloadError::TooLarge(bytes.len()));
    }
    let v: Value = serde_json::from_slice(bytes).map_err(|e| PayloadError::NotJson(e.to_string()))?;
    if !v.is_object() {
        return Err(PayloadError::NotJson("not an object".into()));
    }
    match v.get("schema") {
        Some(s) if s.as_u64() == Some(SCHEMA) => {}
        other => return Err(PayloadError::Schema(other.map_or("missing".into(), |s| s.to_string()))),
    }
    let kind = v.get("kind").and_then(Value::as_str).and_then(Kind::parse);
    let Some(kind) = kind else {
        return Err(PayloadError::Kind(v.get("kind").map_or("missing".into(), |k| k.to_string())));
    };
    if has_control(&v) {
        return Err(PayloadError::Control);
    }
    Ok((kind, v))
}

fn has_control(v: &Value) -> bool {
    let bad = |s: &str| s.chars().any(|c| c.is_control() && c != '\n' && c != '\t');
    match v {
        Value::String(s) => bad(s),
        Value::Array(a) => a.iter().any(has_control),
        Value::Object(m) => m.iter().any(|(k, v)| bad(k) || has_control(v)),
        _ => false,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_payload_carries_schema_and_kind_and_passes_the_check() {
        let config = ConfigSet::embedded();
        let d = description(&RunDescription {
            config: &config,
            command: "rehearse",
            started_unix_ns: 1_700_000_000_000_000_000,
            snapshot_every_ns: 100_000_000,
            sources: &crate::event::SourceTable::default(),
        });
        assert_eq!(d["sources"][0]["kind"], "operator", "the operator and the session are always sources 0 and 1");
        assert_eq!(d["started_utc"], "2023-11-14T22:13:20Z");
        assert_eq!(d["vehicle"], config.vehicle.name.as_str());
        assert!(d["config"].as_array().is_some_and(|a| a.len() == config.texts.len()));
        for (kind, v) in [(Kind::Description, d), (Kind::Status, status("online")), (Kind::Alerts, alerts(0, &[]))] {
            let bytes = serde_json::to_vec(&v).unwrap();
            assert_eq!(check(&bytes).map(|(k, _)| k), Ok(kind));
            assert_eq!(v["schema"], SCHEMA);
        }
    }

    // Issue 16, item 2: hostile payloads are refused, not shown.
    #[test]
    fn hostile_payloads_are_refused() {
        assert!(matches!(check(b"not json"), Err(PayloadError::NotJson(_))));
        assert!(matches!(check(b"[1,2]"), Err(PayloadError::NotJson(_))));
        assert!(matches!(check(br#"{"schema":2,"kind":"status"}"#), Err(PayloadError::Schema(_))));
        assert!(matches!(check(br#"{"schema":1,"kind":"shell"}"#), Err(PayloadError::Kind(_))));
        let esc = serde_json::to_vec(&json!({"schema":1,"kind":"status","state":"\u{1b}[2Jowned"})).unwrap();
        assert_eq!(check(&esc).map(|(k, _)| k), Err(PayloadError::Control));
        let big = vec![b' '; MAX_PAYLOAD_BYTES + 1];
        assert!(matches!(check(&big), Err(PayloadError::TooLarge(_))));
    }
}
