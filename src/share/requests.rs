//! Acknowledgements and marks sent back by followers, and the reading
//! station's checks on them.
//!
//! A follower publishes to `PREFIX/control/USERNAME` ([`Topics::control`]).
//! The broker's ACL (`pattern write PREFIX/control/%u`) lets each user
//! write only under its own name, so the sender is the topic's last level:
//! the reading station takes it from there, never from the payload, and
//! refuses a payload that names a sender. The reading station reads these
//! only when started with `--share-accept-control` (a run takes no orders
//! unless asked); it checks every message ([`check`]), hands what it
//! accepts to the stream as the operator action a local key would make
//! ([`Order::actions`]), counts the rest by reason ([`ControlCounts`]), and
//! answers each on `PREFIX/answers/USERNAME` ([`answer`]), so a follower
//! knows its message arrived: an MQTT 3.1.1 broker drops a message the ACL
//! forbids without a word, and the follower then says no answer came.
//!
//! Payload (schema 1), at most [`MAX_CONTROL_BYTES`]:
//! `{"schema":1,"kind":"ack","key":"ALERT KEY","id":N}` or
//! `{"schema":1,"kind":"mark","note":"TEXT","id":N}`; `id` (optional, a
//! whole number) comes back in the answer, `note` is optional.

use std::collections::BTreeMap;

use serde_json::{Map, Value, json};

use super::payload::{Kind, SCHEMA};
use super::topics::Topics;
use crate::engine::Alert;
use crate::printable::{clipped, printable};
use crate::stream::control::Operator;

/// The largest control message taken (an acknowledgement is tens of bytes).
pub const MAX_CONTROL_BYTES: usize = 4096;
/// The longest note of a mark, in characters.
pub const MAX_NOTE_CHARS: usize = 200;
/// The longest alert key taken.
pub const MAX_KEY_BYTES: usize = 200;
/// The longest sender (a topic level) taken.
pub const MAX_SENDER_BYTES: usize = 64;
/// How many refusals are kept word for word (the rest are only counted).
pub const FIRST_REFUSALS: usize = 10;

/// What a follower asks.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Request {
    /// Acknowledge one alert, by its key as the snapshot JSON names it.
    Ack(String),
    /// A mark, with an optional note.
    Mark(Option<String>),
}

impl Request {
    /// `ack` or `mark`: the payload's kind.
    pub fn kind(&self) -> &'static str {
        match self {
            Request::Ack(_) => "ack",
            Request::Mark(_) => "mark",
        }
    }

    /// As a line a person reads (`ack target`, `mark boost felt late`).
    pub fn describe(&self) -> String {
        match self {
            Request::Ack(k) => format!("ack {}", clipped(k, 80)),
            Request::Mark(None) => "mark".into(),
            Request::Mark(Some(n)) => format!("mark {}", clipped(n, 80)),
        }
    }

    /// The payload that asks this, with `id` for the answer.
    pub fn payload(&self, id: u64) -> Value {
        match self {
            Request::Ack(k) => ack_payload(k, id),
            Request::Mark(n) => mark_payload(n.as_deref(), id),
        }
    }
}

/// The payload acknowledging the alert `alert_key` (the `key` of an alert
/// in a snapshot); `id` comes back in the answer.
pub fn ack_payload(alert_key: &str, id: u64) -> Value {
    json!({ "schema": SCHEMA, "kind": "ack", "key": alert_key, "id": id })
}

/// The payload of a mark with an optional note; `id` comes back in the answer.
pub fn mark_payload(note: Option<&str>, id: u64) -> Value {
    match note {
        Some(n) => json!({ "schema": SCHEMA, "kind": "mark", "note": n, "id": id }),
        None => json!({ "schema": SCHEMA, "kind": "mark", "id": id }),
    }
}

/// Why a line typed on a follower's standard input is not sent.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum CommandError {
    /// The line holds a control character (an escape sequence?).
    #[error("control characters are not sent")]
    ControlCharacter,
    /// `ack` with nothing after it.
    #[error("ack needs an alert key (ack KEY; the key as the snapshots name it)")]
    AckWithoutKey,
    /// `ack *`: acknowledging every alert is the reading station's own key.
    #[error("acknowledging every alert at once is left to the reading station")]
    AckEverything,
    /// An alert key longer than [`MAX_KEY_BYTES`].
    #[error("an alert key is at most {MAX_KEY_BYTES} bytes")]
    KeyTooLong,
    /// A note longer than [`MAX_NOTE_CHARS`].
    #[error("a note is at most {MAX_NOTE_CHARS} characters")]
    NoteTooLong,
    /// A first word that is neither `ack` nor `mark` (clipped to 40 characters).
    #[error("\"{0}\" is not a command: ack KEY or mark [NOTE]")]
    Unknown(String),
}

/// A command typed on a follower's standard input: `ack KEY` or
/// `mark [NOTE]`. Checked as the reading station would (lengths, no
/// control characters), so a typing slip is said at once.
pub fn parse_command(line: &str) -> Result<Request, CommandError> {
    let line = line.trim();
    let (word, rest) = line.split_once(char::is_whitespace).map_or((line, ""), |(w, r)| (w, r.trim()));
    if !is_safe(rest) {
        return Err(CommandError::ControlCharacter);
    }
    match word {
        "ack" if rest.is_empty() => Err(CommandError::AckWithoutKey),
        "ack" if rest == "*" => Err(CommandError::AckEverything),
        "ack" if rest.len() > MAX_KEY_BYTES => Err(CommandError::KeyTooLong),
        "ack" => Ok(Request::Ack(rest.to_string())),
        "mark" if rest.chars().count() > MAX_NOTE_CHARS => Err(CommandError::NoteTooLong),
        "mark" => Ok(Request::Mark((!rest.is_empty()).then(|| rest.to_string()))),
        _ => Err(CommandError::Unknown(clipped(word, 40).to_string())),
    }
}

/// A control message the reading station accepted.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Order {
    /// The sender: the control topic's last level (the broker's username).
    pub from: String,
    /// The sender's number for it, echoed in the answer.
    pub id: Option<u64>,
    pub request: Request,
}

impl Order {
    /// The operator actions this order is: the acknowledgement a local key
    /// would make, followed by a mark saying who made it (the recording's
    /// `ack` line has no room for a sender); or the mark, its text saying
    /// who sent it. Each is recorded and published like a local one.
    pub fn actions(&self) -> Vec<Operator> {
        match &self.request {
            Request::Ack(key) => {
                vec![Operator::Ack(key.clone()), Operator::Mark(format!("remote: {} acknowledged {key}", self.from))]
            }
            Request::Mark(None) => vec![Operator::Mark(format!("remote: {}", self.from))],
            Request::Mark(Some(note)) => vec![Operator::Mark(format!("remote: {}: {note}", self.from))],
        }
    }
}

/// Why a control message is refused.
#[derive(Clone, Debug, thiserror::Error, PartialEq, Eq)]
pub enum Refusal {
    /// Over [`MAX_CONTROL_BYTES`].
    #[error("{0} bytes, over the limit of {MAX_CONTROL_BYTES}")]
    TooLarge(usize),
    /// Not UTF-8 JSON, or not an object.
    #[error("not a JSON object")]
    NotJson,
    /// `schema` missing or not this version.
    #[error("schema {0} is not {SCHEMA}")]
    Schema(String),
    /// `kind` missing or not `ack`/`mark`.
    #[error("kind {0} is not ack or mark")]
    Kind(String),
    /// A string (or a field name) holds a control character or a
    /// bidirectional override: an escape sequence aimed at a terminal.
    #[error("a string holds a control character (an escape sequence?)")]
    ControlCharacter,
    /// The topic's last level (the sender) is empty, too long or not printable.
    #[error("the sender (the topic's last level) is empty, over {MAX_SENDER_BYTES} bytes or not printable")]
    Sender,
    /// The payload names a sender: only the topic says who sent it.
    #[error("the payload names a sender (field \"{0}\"); the sender is the topic's last level")]
    SenderInPayload(String),
    /// A field that is not part of the layout, or of the wrong type.
    #[error("{0}")]
    Field(String),
    /// A retained control message: an order left on the broker from before.
    #[error("a retained control message is an old order: not taken")]
    Retained,
    /// `ack` of `*`: every alert at once is left to the reading station.
    #[error("acknowledging every alert at once is left to the reading station")]
    AckAll,
    /// No alert of that key is shown now.
    #[error("no alert {0} is shown")]
    UnknownAlert(String),
    /// The alert is shown but no longer active.
    #[error("alert {0} is no longer active")]
    NotActive(String),
    /// The alert is already acknowledged.
    #[error("alert {0} is already acknowledged")]
    AlreadyAcked(String),
    /// The note is over [`MAX_NOTE_CHARS`].
    #[error("the note is {0} characters, over {MAX_NOTE_CHARS}")]
    NoteTooLong(usize),
    /// The stream is not taking operator actions (ended, or its queue full).
    #[error("the stream is not taking operator actions now (ended or busy)")]
    Busy,
}

impl Refusal {
    /// A short name for counting by reason in the summary.
    pub fn reason(&self) -> &'static str {
        match self {
            Refusal::TooLarge(_) => "too_large",
            Refusal::NotJson => "not_json",
            Refusal::Schema(_) => "schema",
            Refusal::Kind(_) => "kind",
            Refusal::ControlCharacter => "control_character",
            Refusal::Sender => "sender",
            Refusal::SenderInPayload(_) => "sender_in_payload",
            Refusal::Field(_) => "field",
            Refusal::Retained => "retained",
            Refusal::AckAll => "ack_all",
            Refusal::UnknownAlert(_) => "unknown_alert",
            Refusal::NotActive(_) => "not_active",
            Refusal::AlreadyAcked(_) => "already_acked",
            Refusal::NoteTooLong(_) => "note_too_long",
            Refusal::Busy => "busy",
        }
    }
}

/// Whether `s` can reach a terminal as it is (no control character, no
/// bidirectional override).
fn is_safe(s: &str) -> bool {
    matches!(printable(s), std::borrow::Cow::Borrowed(_))
}

fn has_unsafe(v: &Value) -> bool {
    match v {
        Value::String(s) => !is_safe(s),
        Value::Array(a) => a.iter().any(has_unsafe),
        Value::Object(m) => m.iter().any(|(k, v)| !is_safe(k) || has_unsafe(v)),
        _ => false,
    }
}

/// Field names that would name a sender.
const SENDER_FIELDS: [&str; 6] = ["from", "sender", "user", "username", "by", "who"];

/// Whether `user` can be a control topic's last level: not empty, at most
/// [`MAX_SENDER_BYTES`], printable, no `/`, `+` or `#`.
pub fn usable_sender(user: &str) -> bool {
    !user.is_empty() && user.len() <= MAX_SENDER_BYTES && is_safe(user) && !user.contains(['/', '+', '#'])
}

/// Checks one message received on `topic` (`retained`: delivered from the
/// broker's store) against the alerts shown now. Checks in order: the
/// sender (the topic's last level), retained, size, JSON object, schema,
/// kind, control characters anywhere, the fields, then the alert (known,
/// active, not yet acknowledged) or the note's length.
pub fn check(topics: &Topics, topic: &str, retained: bool, bytes: &[u8], alerts: &[Alert]) -> Result<Order, Refusal> {
    let from = topics.control_sender(topic).ok_or(Refusal::Sender)?;
    if !usable_sender(from) {
        return Err(Refusal::Sender);
    }
    if retained {
        return Err(Refusal::Retained);
    }
    if bytes.len() > MAX_CONTROL_BYTES {
        return Err(Refusal::TooLarge(bytes.len()));
    }
    let Ok(Value::Object(m)) = serde_json::from_slice::<Value>(bytes) else { return Err(Refusal::NotJson) };
    match m.get("schema") {
        Some(s) if s.as_u64() == Some(SCHEMA) => {}
        other => return Err(Refusal::Schema(other.map_or("missing".into(), |s| clipped(&s.to_string(), 40).into()))),
    }
    let kind = m.get("kind").and_then(Value::as_str);
    if !matches!(kind, Some("ack" | "mark")) {
        return Err(Refusal::Kind(m.get("kind").map_or("missing".into(), |k| clipped(&k.to_string(), 40).into())));
    }
    if m.iter().any(|(k, v)| !is_safe(k) || has_unsafe(v)) {
        return Err(Refusal::ControlCharacter);
    }
    if let Some(f) = m.keys().find(|k| SENDER_FIELDS.contains(&k.to_ascii_lowercase().as_str())) {
        return Err(Refusal::SenderInPayload(f.clone()));
    }
    let id = match m.get("id") {
        None | Some(Value::Null) => None,
        Some(v) => Some(v.as_u64().ok_or_else(|| Refusal::Field("id is not a whole number".into()))?),
    };
    let request = if kind == Some("ack") { ack(&m, alerts)? } else { mark(&m)? };
    Ok(Order { from: from.to_string(), id, request })
}

fn only(m: &Map<String, Value>, allowed: &[&str]) -> Result<(), Refusal> {
    match m.keys().find(|k| !allowed.contains(&k.as_str())) {
        Some(k) => Err(Refusal::Field(format!("unknown field \"{}\"", clipped(k, 40)))),
        None => Ok(()),
    }
}

fn ack(m: &Map<String, Value>, alerts: &[Alert]) -> Result<Request, Refusal> {
    only(m, &["schema", "kind", "id", "key"])?;
    let key =
        m.get("key").and_then(Value::as_str).ok_or_else(|| Refusal::Field("ack needs a key (a string)".into()))?;
    if key == "*" {
        return Err(Refusal::AckAll);
    }
    if key.is_empty() || key.len() > MAX_KEY_BYTES {
        return Err(Refusal::UnknownAlert(clipped(key, 60).into()));
    }
    match alerts.iter().find(|a| a.key == key) {
        None => Err(Refusal::UnknownAlert(clipped(key, 60).into())),
        Some(a) if !a.active => Err(Refusal::NotActive(key.to_string())),
        Some(a) if a.acked => Err(Refusal::AlreadyAcked(key.to_string())),
        Some(_) => Ok(Request::Ack(key.to_string())),
    }
}

fn mark(m: &Map<String, Value>) -> Result<Request, Refusal> {
    only(m, &["schema", "kind", "id", "note"])?;
    let note = match m.get("note") {
        None | Some(Value::Null) => None,
        Some(Value::String(s)) => Some(s.trim()),
        Some(_) => return Err(Refusal::Field("note is not a string".into())),
    };
    let chars = note.map_or(0, |n| n.chars().count());
    if chars > MAX_NOTE_CHARS {
        return Err(Refusal::NoteTooLong(chars));
    }
    Ok(Request::Mark(note.filter(|n| !n.is_empty()).map(str::to_string)))
}

/// The reading station's answer to one control message, published on
/// `PREFIX/answers/USERNAME`: `to` (the sender), `id` (as sent, or null),
/// `request` (`ack`/`mark`, null when unreadable), `accepted`, and when
/// refused `reason` (the short name counted in the summary) and `why`.
pub fn answer(to: &str, id: Option<u64>, result: &Result<Order, Refusal>) -> Value {
    let (request, accepted, reason, why) = match result {
        Ok(o) => (Some(o.request.kind()), true, None, None),
        Err(r) => (None, false, Some(r.reason()), Some(r.to_string())),
    };
    let mut body = Map::new();
    body.insert("schema".into(), json!(SCHEMA));
    body.insert("kind".into(), json!(Kind::ControlAnswer.as_str()));
    body.insert("to".into(), json!(to));
    body.insert("id".into(), json!(id));
    body.insert("request".into(), json!(request));
    body.insert("accepted".into(), json!(accepted));
    body.insert("reason".into(), json!(reason));
    body.insert("why".into(), json!(why));
    Value::Object(body)
}

/// The `id` of a control message, read leniently (for the answer to a
/// message refused before its fields were read).
pub fn id_of(bytes: &[u8]) -> Option<u64> {
    if bytes.len() > MAX_CONTROL_BYTES {
        return None;
    }
    serde_json::from_slice::<Value>(bytes).ok()?.get("id")?.as_u64()
}

/// What the reading station did with control messages, for the summary.
#[derive(Debug, Default, Clone, PartialEq, Eq)]
pub struct ControlCounts {
    /// Acknowledgements accepted.
    pub acks: u64,
    /// Marks accepted.
    pub marks: u64,
    /// Refused, by [`Refusal::reason`].
    pub refused: BTreeMap<&'static str, u64>,
    /// The first [`FIRST_REFUSALS`] refusals: who and why (printable).
    pub first_refusals: Vec<String>,
}

impl ControlCounts {
    pub fn accepted(&mut self, order: &Order) {
        match order.request {
            Request::Ack(_) => self.acks += 1,
            Request::Mark(_) => self.marks += 1,
        }
    }

    /// Counts a refusal; returns its line when it is among the first (to
    /// say on stderr), `None` after.
    pub fn refused(&mut self, from_topic: &str, r: &Refusal) -> Option<String> {
        *self.refused.entry(r.reason()).or_default() += 1;
        if self.first_refusals.len() >= FIRST_REFUSALS {
            return None;
        }
        let line = format!("{}: {r}", clipped(from_topic, 120));
        self.first_refusals.push(line.clone());
        Some(line)
    }

    pub fn refused_total(&self) -> u64 {
        self.refused.values().sum()
    }

    /// The summary's `share.control` block.
    pub fn json(&self) -> Value {
        json!({
            "acks_accepted": self.acks,
            "marks_accepted": self.marks,
            "refused": self.refused_total(),
            "refused_by_reason": self.refused,
            "first_refusals": self.first_refusals,
        })
    }
}

/// How long a follower waits for the reading station's answer before it
/// says none came.
pub const ANSWER_WAIT: std::time::Duration = std::time::Duration::from_secs(3);

/// A follower's control messages awaiting their answer: sends number them,
/// answers (on `PREFIX/answers/USERNAME`) settle them, and those past
/// [`ANSWER_WAIT`] are said unanswered: the reading station does not take
/// orders (no `--share-accept-control`), is gone, or the broker's ACL
/// dropped the message (an MQTT 3.1.1 broker says nothing to the sender).
#[derive(Debug)]
pub struct Awaiting {
    user: String,
    next_id: u64,
    waiting: Vec<(u64, std::time::Instant, String)>,
    pub sent: u64,
    pub accepted: u64,
    pub refused: u64,
    pub unanswered: u64,
}

impl Awaiting {
    /// For `user`; numbers start from `first_id` (e.g. the wall clock in
    /// ms, so two sessions of one user do not take each other's answers).
    pub fn new(user: &str, first_id: u64) -> Awaiting {
        Awaiting {
            user: user.to_string(),
            next_id: first_id,
            waiting: Vec::new(),
            sent: 0,
            accepted: 0,
            refused: 0,
            unanswered: 0,
        }
    }

    /// Numbers `req`, notes it as waiting since `now`, and gives its payload.
    pub fn send(&mut self, req: &Request, now: std::time::Instant) -> Value {
        let id = self.next_id;
        self.next_id += 1;
        self.sent += 1;
        self.waiting.push((id, now, req.describe()));
        req.payload(id)
    }

    /// Takes a `control_answer`; a line for the user when it answers one of
    /// ours.
    pub fn answer(&mut self, v: &Value) -> Option<String> {
        if v["to"].as_str() != Some(self.user.as_str()) {
            return None;
        }
        let id = v["id"].as_u64()?;
        let i = self.waiting.iter().position(|(w, _, _)| *w == id)?;
        let (_, _, what) = self.waiting.remove(i);
        Some(if v["accepted"] == true {
            self.accepted += 1;
            format!("termvel: the reading station accepted \"{what}\"")
        } else {
            self.refused += 1;
            let why = v["why"].as_str().unwrap_or("no reason given");
            format!("termvel: the reading station refused \"{what}\": {}", clipped(why, 200))
        })
    }

    /// Lines for the messages unanswered for [`ANSWER_WAIT`] by `now` (all
    /// of them with `all`, at the end).
    pub fn overdue(&mut self, now: std::time::Instant, all: bool) -> Vec<String> {
        let (late, keep): (Vec<_>, Vec<_>) =
            std::mem::take(&mut self.waiting).into_iter().partition(|(_, at, _)| all || now - *at >= ANSWER_WAIT);
        self.waiting = keep;
        self.unanswered += late.len() as u64;
        late.into_iter()
            .map(|(_, _, what)| {
                format!(
                    "termvel: no answer from the reading station to \"{what}\" within {} s: it may not take orders (--share-accept-control), or the broker's ACL did not let {} write to the control topic",
                    ANSWER_WAIT.as_secs(),
                    clipped(&self.user, 64)
                )
            })
            .collect()
    }

    /// The follower summary's `control` block.
    pub fn json(&self) -> Value {
        json!({
            "sent": self.sent,
            "accepted": self.accepted,
            "refused": self.refused,
            "unanswered": self.unanswered + self.waiting.len() as u64,
        })
    }
}

/// A follower's commands, one a line from `input` (`ack KEY`, `mark
/// [NOTE]`; `termvel follow --send-from-stdin`): each checked
/// ([`parse_command`]; a bad line is said on stderr and not sent),
/// numbered in `awaiting` and handed to `out` for `topic`. Returns when the
/// input ends or `out` closes. Blocking: run it on a thread of its own.
pub fn send_lines(
    input: impl std::io::BufRead,
    topic: &str,
    awaiting: &std::sync::Mutex<Awaiting>,
    out: &tokio::sync::mpsc::Sender<(String, Vec<u8>)>,
) {
    for line in input.lines().map_while(Result::ok) {
        if line.trim().is_empty() {
            continue;
        }
        match parse_command(&line) {
            Ok(req) => {
                let body = awaiting.lock().unwrap_or_else(|e| e.into_inner()).send(&req, std::time::Instant::now());
                crate::say!("termvel: sent \"{}\"", req.describe());
                if out.blocking_send((topic.to_string(), serde_json::to_vec(&body).unwrap_or_default())).is_err() {
                    break;
                }
            }
            Err(why) => crate::say!("termvel: not sent: {why}"),
        }
    }
}

/// Says on stderr, as it happens, each message of `awaiting` the reading
/// station has not answered within [`ANSWER_WAIT`]. Runs until dropped.
pub async fn say_overdue(awaiting: std::sync::Arc<std::sync::Mutex<Awaiting>>) {
    let mut tick = tokio::time::interval(std::time::Duration::from_millis(250));
    loop {
        tick.tick().await;
        let lines = awaiting.lock().unwrap_or_else(|e| e.into_inner()).overdue(std::time::Instant::now(), false);
        for line in lines {
            crate::say!("{line}");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::alerts::Severity;

    fn alert(key: &str, active: bool, acked: bool) -> Alert {
        Alert {
            key: key.into(),
            severity: Severity::Caution,
            message: "m".into(),
            text: "m".into(),
            raised_ns: 0,
            active,
            acked,
        }
    }

    fn topics() -> Topics {
        Topics::new("pit/run").unwrap()
    }

    fn shown() -> Vec<Alert> {
        vec![alert("target", true, false), alert("derating", true, true), alert("stale:gnss", false, false)]
    }

    fn run(topic: &str, body: &str) -> Result<Order, Refusal> {
        check(&topics(), topic, false, body.as_bytes(), &shown())
    }

    #[test]
    fn an_ack_and_a_mark_pass_and_become_operator_actions() {
        let o = run("pit/run/control/pit-eng", r#"{"schema":1,"kind":"ack","key":"target","id":7}"#).unwrap();
        assert_eq!(o, Order { from: "pit-eng".into(), id: Some(7), request: Request::Ack("target".into()) });
        assert_eq!(
            o.actions(),
            vec![Operator::Ack("target".into()), Operator::Mark("remote: pit-eng acknowledged target".into())]
        );
        let o = run("pit/run/control/hut", r#"{"schema":1,"kind":"mark","note":" boost late "}"#).unwrap();
        assert_eq!(o.request, Request::Mark(Some("boost late".into())));
        assert_eq!(o.actions(), vec![Operator::Mark("remote: hut: boost late".into())]);
        let o = run("pit/run/control/hut", r#"{"schema":1,"kind":"mark"}"#).unwrap();
        assert_eq!(o.actions(), vec![Operator::Mark("remote: hut".into())]);
        // The payload builders make what the check takes.
        for req in [Request::Ack("target".into()), Request::Mark(Some("x".into())), Request::Mark(None)] {
            let body = serde_json::to_string(&req.payload(3)).unwrap();
            assert_eq!(run("pit/run/control/a", &body).map(|o| o.request), Ok(req));
        }
    }

    // Issue 16, item 2: every hostile or mistaken control message is
    // refused with its own reason (counted by it in the summary).
    #[test]
    fn hostile_and_mistaken_messages_are_refused_by_reason() {
        let big = format!(r#"{{"schema":1,"kind":"mark","note":"{}"}}"#, "x".repeat(MAX_CONTROL_BYTES));
        let long_note = format!(r#"{{"schema":1,"kind":"mark","note":"{}"}}"#, "é".repeat(MAX_NOTE_CHARS + 1));
        let ok = "pit/run/control/pit-eng";
        let cases: &[(&str, &str, &str)] = &[
            (ok, &big, "too_large"),
            (ok, "ack target", "not_json"),
            (ok, "[1]", "not_json"),
            (ok, r#"{"schema":2,"kind":"ack","key":"target"}"#, "schema"),
            (ok, r#"{"kind":"ack","key":"target"}"#, "schema"),
            (ok, r#"{"schema":1,"kind":"quit"}"#, "kind"),
            (ok, r#"{"schema":1,"kind":"mark","note":"\u001b[2J\u001b]0;owned\u0007"}"#, "control_character"),
            (ok, r#"{"schema":1,"kind":"mark","note":"abc\u202edef"}"#, "control_character"),
            (ok, r#"{"schema":1,"kind":"mark","note\u001b[1m":"x"}"#, "control_character"),
            (ok, r#"{"schema":1,"kind":"ack","key":"target","from":"director"}"#, "sender_in_payload"),
            (ok, r#"{"schema":1,"kind":"mark","User":"director"}"#, "sender_in_payload"),
            (ok, r#"{"schema":1,"kind":"ack","key":"target","force":true}"#, "field"),
            (ok, r#"{"schema":1,"kind":"ack"}"#, "field"),
            (ok, r#"{"schema":1,"kind":"ack","key":"target","id":-1}"#, "field"),
            (ok, r#"{"schema":1,"kind":"mark","note":5}"#, "field"),
            (ok, r#"{"schema":1,"kind":"ack","key":"*"}"#, "ack_all"),
            (ok, r#"{"schema":1,"kind":"ack","key":"no-such"}"#, "unknown_alert"),
            (ok, r#"{"schema":1,"kind":"ack","key":"stale:gnss"}"#, "not_active"),
            (ok, r#"{"schema":1,"kind":"ack","key":"derating"}"#, "already_acked"),
            (ok, &long_note, "note_too_long"),
            ("pit/run/control/", r#"{"schema":1,"kind":"mark"}"#, "sender"),
            ("pit/run/control/a\u{1b}[2J", r#"{"schema":1,"kind":"mark"}"#, "sender"),
            ("pit/run/snapshot", r#"{"schema":1,"kind":"mark"}"#, "sender"),
        ];
        for (topic, body, reason) in cases {
            let r = run(topic, body).unwrap_err();
            assert_eq!(r.reason(), *reason, "{topic} {body}: {r}");
            assert!(is_safe(&r.to_string()), "a refusal's words are printable: {r:?}");
        }
        let retained = check(&topics(), ok, true, br#"{"schema":1,"kind":"mark"}"#, &shown());
        assert_eq!(retained, Err(Refusal::Retained));
    }

    #[test]
    fn answers_and_counts() {
        let ok = run("pit/run/control/pit-eng", r#"{"schema":1,"kind":"ack","key":"target","id":9}"#);
        let a = answer("pit-eng", Some(9), &ok);
        assert_eq!(
            (a["kind"].as_str(), a["accepted"].as_bool(), a["id"].as_u64()),
            (Some("control_answer"), Some(true), Some(9))
        );
        assert_eq!(super::super::payload::check(&serde_json::to_vec(&a).unwrap()).unwrap().0, Kind::ControlAnswer);
        let bad = run("pit/run/control/pit-eng", r#"{"schema":1,"kind":"ack","key":"gone","id":10}"#);
        let a = answer("pit-eng", id_of(br#"{"id":10}"#), &bad);
        assert_eq!((a["accepted"].as_bool(), a["reason"].as_str()), (Some(false), Some("unknown_alert")));
        let mut c = ControlCounts::default();
        c.accepted(ok.as_ref().unwrap());
        for i in 0..FIRST_REFUSALS + 2 {
            let said = c.refused("pit/run/control/x", bad.as_ref().unwrap_err());
            assert_eq!(said.is_some(), i < FIRST_REFUSALS, "only the first are said");
        }
        assert_eq!(c.json()["refused_by_reason"]["unknown_alert"], FIRST_REFUSALS as u64 + 2);
        assert_eq!(c.json()["acks_accepted"], 1);
    }

    // Issue 16, item 2: a follower is told what became of what it sent:
    // accepted, refused and why, or no answer (a broker's ACL drops a
    // forbidden message without a word).
    #[test]
    fn a_follower_matches_answers_and_says_what_went_unanswered() {
        let t0 = std::time::Instant::now();
        let mut w = Awaiting::new("pit-eng", 100);
        let ack = w.send(&Request::Ack("target".into()), t0);
        let mark = w.send(&Request::Mark(None), t0);
        assert_eq!((ack["id"].as_u64(), mark["id"].as_u64()), (Some(100), Some(101)));
        let order = Order { from: "pit-eng".into(), id: Some(100), request: Request::Ack("target".into()) };
        assert_eq!(w.answer(&answer("someone-else", Some(100), &Ok(order.clone()))), None, "not ours");
        let line = w.answer(&answer("pit-eng", Some(100), &Ok(order))).unwrap();
        assert!(line.contains("accepted \"ack target\""), "{line}");
        assert!(w.overdue(t0 + ANSWER_WAIT / 2, false).is_empty());
        let late = w.overdue(t0 + ANSWER_WAIT, false);
        assert_eq!(late.len(), 1);
        assert!(late[0].contains("no answer") && late[0].contains("\"mark\""), "{}", late[0]);
        let m = w.send(&Request::Mark(Some("x".into())), t0);
        let refused = answer("pit-eng", m["id"].as_u64(), &Err(Refusal::Busy));
        assert!(w.answer(&refused).unwrap().contains("refused \"mark x\""));
        assert_eq!(w.json(), json!({"sent": 3, "accepted": 1, "refused": 1, "unanswered": 1}));
    }

    #[test]
    fn lines_are_checked_numbered_and_sent() {
        let awaiting = std::sync::Mutex::new(Awaiting::new("pit-eng", 5));
        let (tx, mut rx) = tokio::sync::mpsc::channel(8);
        send_lines(&b"ack target\n\nquit\nmark boost late\n"[..], "pit/control/pit-eng", &awaiting, &tx);
        let sent: Vec<(String, Value)> =
            std::iter::from_fn(|| rx.try_recv().ok()).map(|(t, b)| (t, serde_json::from_slice(&b).unwrap())).collect();
        assert_eq!(sent.len(), 2, "the bad line is not sent");
        assert_eq!(sent[0].0, "pit/control/pit-eng");
        assert_eq!(sent[0].1, ack_payload("target", 5));
        assert_eq!(sent[1].1, mark_payload(Some("boost late"), 6));
        assert!(usable_sender("pit-eng") && !usable_sender("a/b") && !usable_sender("") && !usable_sender("x\u{1b}"));
    }

    #[test]
    fn commands_typed_on_a_follower() {
        assert_eq!(parse_command("ack target"), Ok(Request::Ack("target".into())));
        assert_eq!(parse_command("  mark  boost felt late "), Ok(Request::Mark(Some("boost felt late".into()))));
        assert_eq!(parse_command("mark"), Ok(Request::Mark(None)));
        for bad in ["ack", "ack *", "quit", "mark \u{1b}[2J", ""] {
            assert!(parse_command(bad).is_err(), "{bad:?}");
        }
        assert!(parse_command(&format!("mark {}", "x".repeat(MAX_NOTE_CHARS + 1))).is_err());
    }
}
