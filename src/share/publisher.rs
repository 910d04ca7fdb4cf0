//! Publishing a running stream: the sink the driver feeds, and the thread
//! that talks to the broker.
//!
//! The driver never waits on the network. [`ShareSink`] wraps the
//! stream's own sink (the screens, the headless printer): after passing a
//! snapshot on, it offers it to a [`DropOldest`] queue of
//! [`SNAPSHOT_QUEUE`] (when the broker is slow, the oldest waiting snapshot
//! is dropped and counted), and the few other messages (alert changes, the
//! alert state, marks, health) to a bounded channel of [`MESSAGE_QUEUE`]
//! with `try_send` (full: counted as not shared). The publisher runs on its
//! own thread with its own runtime, so even a stream run as fast as
//! possible on one thread never polls a socket. While the link is down,
//! snapshots are dropped (a follower wants the latest, not the past) and
//! messages wait up to [`HOLD_FOR`] (at most [`HOLD_MAX`] of them), then
//! are counted as not shared.
//!
//! With `--share-accept-control` the connection task also subscribes to
//! the followers' control topics; each message is checked
//! ([`super::requests::check`]) against the alerts shown now (which the tap
//! keeps for it), an accepted one is handed to the stream's control channel
//! with `try_reserve_many` (never waiting: a full channel is a refusal,
//! `busy`), and every sender gets an answer.

use std::collections::VecDeque;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use rumqttc::{AsyncClient, ConnectionError, Event, LastWill, Outgoing, Packet, QoS};
use serde_json::{Value, json};
use tokio::sync::{mpsc, watch};

use super::broker::{BrokerError, BrokerUrl, TlsFiles};
use super::credentials::Credentials;
use super::payload;
use super::queue::DropOldest;
use super::requests::{self, ControlCounts, Refusal};
use super::topics::Topics;
use crate::engine::snapshot::SourceView;
use crate::engine::{Alert, Snapshot};
use crate::event::{LinkState, NS_PER_S, SourceTable, TimeNs};
use crate::stream::{Control, SnapshotSink, StreamStatus};

/// Snapshots waiting for the broker: latest wins beyond this. At 10 a
/// second of stream time that is 6.4 s at x1, 0.8 s at x8; enough to ride
/// out a publisher starved of processor time for a moment (the test
/// machine), small enough that a follower is never shown a stale past.
pub const SNAPSHOT_QUEUE: usize = 64;
/// Alert changes, alert states, marks and health waiting for the publisher.
pub const MESSAGE_QUEUE: usize = 1024;
/// Requests waiting in the MQTT client for the connection task (a burst
/// of snapshots and messages while the socket is busy).
pub const CLIENT_QUEUE: usize = 1024;
/// How long a message waits for a link that is down before it is counted
/// as not shared.
pub const HOLD_FOR: Duration = Duration::from_secs(10);
/// The most messages held while the link is down.
pub const HOLD_MAX: usize = 1000;
/// Source health is published once a second of stream time, and at once
/// when a link changes.
pub const HEALTH_EVERY_NS: TimeNs = NS_PER_S;
/// How long the end of a run waits for the last messages to go out.
pub const DRAIN_FOR: Duration = Duration::from_secs(2);
/// Back-off between reconnection attempts: from the first to the most.
/// The most is kept at half a second so that a station and its followers
/// are back within two seconds of a broker's return: two connection
/// attempts a second cost a broker nothing, a longer wait is felt at the
/// pit wall.
pub const BACKOFF_FIRST: Duration = Duration::from_millis(100);
pub const BACKOFF_MAX: Duration = Duration::from_millis(500);

/// Why sharing could not start.
#[derive(Debug, thiserror::Error)]
pub enum ShareError {
    /// The broker's options (URL, TLS files).
    #[error(transparent)]
    Broker(#[from] BrokerError),
    /// The publisher's thread or runtime could not start.
    #[error("cannot start the publisher: {0}")]
    Start(#[from] std::io::Error),
}

/// Everything the publisher needs.
pub struct ShareSettings {
    pub url: BrokerUrl,
    pub topics: Topics,
    pub credentials: Option<Credentials>,
    /// The TLS files for `mqtts://` (CA, client certificate and key).
    pub tls: TlsFiles,
    /// The retained run description ([`payload::description`]).
    pub description: Value,
    /// Say link changes on stderr (headless); on the screens they go to the log.
    pub say_on_stderr: bool,
    /// Share the raw events in batches (`--share-events`).
    pub events: bool,
    /// Take acknowledgements and marks from followers
    /// (`--share-accept-control`): the stream's control channel, which
    /// accepted orders are sent to as operator actions. `None`: none taken,
    /// the control topics are not even subscribed.
    pub control: Option<mpsc::Sender<Control>>,
}

/// What the publisher did, counted while it runs (read at the end, or by a
/// screen while running).
#[derive(Debug, Default)]
pub struct ShareStats {
    /// Snapshots the stream made.
    pub snapshots: AtomicU64,
    /// Snapshots handed to the MQTT client while the link was up.
    pub snapshots_published: AtomicU64,
    /// Snapshots dropped because newer ones were waiting (broker slow).
    pub snapshots_dropped_slow: AtomicU64,
    /// Snapshots dropped because the link was down.
    pub snapshots_dropped_down: AtomicU64,
    /// Batches of raw events made (`--share-events`); they count among the
    /// messages below once published or not shared.
    pub event_batches: AtomicU64,
    /// Other messages handed to the client.
    pub messages_published: AtomicU64,
    /// Other messages not shared (queue full, or held past [`HOLD_FOR`]).
    pub messages_not_shared: AtomicU64,
    /// Whether the link to the broker is up now (at the end: whether it was
    /// up when the stream ended).
    pub link_up: AtomicBool,
    /// Times the link was lost (or failed to come up).
    pub link_losses: AtomicU64,
    /// Connections made (the first and every reconnection).
    pub connections: AtomicU64,
    /// The latest link error, for the user.
    pub last_error: Mutex<Option<String>>,
    /// Control messages from followers (`Some` with `--share-accept-control`).
    pub control: Mutex<Option<ControlCounts>>,
}

impl ShareStats {
    /// The `share` block of a summary.
    pub fn json(&self, url: &BrokerUrl, topics: &Topics) -> Value {
        let n = |a: &AtomicU64| a.load(Ordering::Relaxed);
        json!({
            "broker": url.display(),
            "topic": topics.prefix(),
            "snapshots": n(&self.snapshots),
            "snapshots_published": n(&self.snapshots_published),
            "snapshots_dropped_slow": n(&self.snapshots_dropped_slow),
            "snapshots_dropped_down": n(&self.snapshots_dropped_down),
            "event_batches": n(&self.event_batches),
            "messages_published": n(&self.messages_published),
            "messages_not_shared": n(&self.messages_not_shared),
            "link": if self.link_up.load(Ordering::Relaxed) { "up" } else { "down" },
            "connections": n(&self.connections),
            "link_losses": n(&self.link_losses),
            "last_error": self.last_error.lock().map(|e| e.clone()).unwrap_or(None),
            "control": self.control.lock().ok().and_then(|c| c.as_ref().map(ControlCounts::json)),
        })
    }

    /// One line for stderr at the end of a run.
    pub fn line(&self, url: &BrokerUrl) -> String {
        let n = |a: &AtomicU64| a.load(Ordering::Relaxed);
        let not_shared = n(&self.snapshots) - n(&self.snapshots_published).min(n(&self.snapshots));
        let mut s = format!(
            "termvel: shared to {}: {} of {} snapshots published ({} not shared), {} other messages ({} not shared)",
            url.display(),
            n(&self.snapshots_published),
            n(&self.snapshots),
            not_shared,
            n(&self.messages_published),
            n(&self.messages_not_shared),
        );
        if let Ok(Some(c)) = self.control.lock().as_deref() {
            s.push_str(&format!(
                "; control messages from followers: {} acknowledgements and {} marks accepted, {} refused",
                c.acks,
                c.marks,
                c.refused_total()
            ));
        }
        if n(&self.connections) == 0 {
            s.push_str("; the broker was never reached");
            if let Ok(Some(e)) = self.last_error.lock().as_deref() {
                s.push_str(&format!(" ({e})"));
            }
        }
        s
    }
}

/// A message other than a snapshot, built into JSON on the publisher's thread.
enum Message {
    Alerts(TimeNs, Vec<Alert>),
    AlertChange(TimeNs, &'static str, Alert),
    Mark(TimeNs, usize),
    Health(TimeNs, Vec<SourceView>),
    /// Raw events (`--share-events`): the batch's number, the events sent
    /// in the batches before it, the events, and their sources' names.
    Events {
        seq: u64,
        before: u64,
        events: Vec<crate::event::Event>,
        sources: SourceTable,
    },
}

/// Raw events are sent in batches of this much stream time…
pub const EVENT_BATCH_NS: TimeNs = 100_000_000;
/// …or of this many events, whichever comes first.
pub const EVENT_BATCH_MAX: usize = 4096;

/// The driver's end of the publisher: fed by [`ShareSink`]. Dropping it
/// closes the queues, and the publisher drains and ends.
pub struct ShareTap {
    snapshots: Arc<DropOldest<Arc<Snapshot>>>,
    messages: mpsc::Sender<Message>,
    stats: Arc<ShareStats>,
    /// The alerts of the previous snapshot, to find changes.
    alerts: Vec<Alert>,
    marks: usize,
    health_at: Option<TimeNs>,
    links: Vec<Option<LinkState>>,
    /// The alerts shown now, for checking followers' acknowledgements
    /// (with `--share-accept-control`; the connection task reads it).
    shown: Option<Shown>,
    /// Whether raw events are shared, and the batch being filled.
    events_on: bool,
    batch: Vec<crate::event::Event>,
    batch_sources: SourceTable,
    batches: u64,
    batched_events: u64,
}

impl Drop for ShareTap {
    fn drop(&mut self) {
        self.send_batch();
        self.snapshots.close();
    }
}

impl ShareTap {
    fn offer(&mut self, snap: &Arc<Snapshot>) {
        self.stats.snapshots.fetch_add(1, Ordering::Relaxed);
        if self.snapshots.push(snap.clone()).is_some() {
            self.stats.snapshots_dropped_slow.fetch_add(1, Ordering::Relaxed);
        }
        let t = snap.t_ns;
        // Alert changes: a handful of alerts, compared by key.
        if snap.alerts != self.alerts {
            for a in &snap.alerts {
                let before = self.alerts.iter().find(|b| b.key == a.key);
                let change = match before {
                    None => Some(if a.active { "raised" } else { "cleared" }),
                    Some(b) if a.raised_ns != b.raised_ns || (a.active && !b.active) => Some("raised"),
                    Some(b) if !a.active && b.active => Some("cleared"),
                    Some(b) if a.acked && !b.acked => Some("acked"),
                    _ => None,
                };
                if let Some(c) = change {
                    self.send(Message::AlertChange(t, c, a.clone()));
                }
            }
            for b in &self.alerts {
                if !snap.alerts.iter().any(|a| a.key == b.key) {
                    self.send(Message::AlertChange(t, "gone", b.clone()));
                }
            }
            self.alerts = snap.alerts.clone();
            if let Some(shown) = &self.shown {
                *shown.lock().unwrap_or_else(|e| e.into_inner()) = snap.alerts.clone();
            }
            self.send(Message::Alerts(t, snap.alerts.clone()));
        }
        if snap.marks != self.marks {
            self.marks = snap.marks;
            self.send(Message::Mark(t, snap.marks));
        }
        let links_changed =
            snap.sources.len() != self.links.len() || snap.sources.iter().zip(&self.links).any(|(s, l)| s.link != *l);
        if links_changed || self.health_at.is_none_or(|h| t - h >= HEALTH_EVERY_NS) {
            self.health_at = Some(t);
            self.links = snap.sources.iter().map(|s| s.link).collect();
            self.send(Message::Health(t, snap.sources.clone()));
        }
    }

    fn event(&mut self, ev: &crate::event::Event, sources: &SourceTable) {
        if !self.events_on || !ev.is_input() {
            return;
        }
        if let Some(first) = self.batch.first()
            && (ev.t_ns - first.t_ns >= EVENT_BATCH_NS || self.batch.len() >= EVENT_BATCH_MAX)
        {
            self.send_batch();
        }
        if self.batch.is_empty() && self.batch_sources != *sources {
            self.batch_sources = sources.clone();
        }
        self.batch.push(ev.clone());
    }

    fn send_batch(&mut self) {
        if self.batch.is_empty() {
            return;
        }
        let events = std::mem::take(&mut self.batch);
        self.batches += 1;
        self.stats.event_batches.fetch_add(1, Ordering::Relaxed);
        let before = self.batched_events;
        self.batched_events += events.len() as u64;
        self.send(Message::Events { seq: self.batches, before, events, sources: self.batch_sources.clone() });
    }

    fn send(&self, m: Message) {
        if self.messages.try_send(m).is_err() {
            self.stats.messages_not_shared.fetch_add(1, Ordering::Relaxed);
        }
    }
}

/// Wraps a stream's sink; with a tap, also offers every snapshot to the
/// publisher (without one, it only passes snapshots on: sharing off).
pub struct ShareSink<'k, K> {
    inner: &'k mut K,
    tap: Option<ShareTap>,
}

impl<'k, K: SnapshotSink> ShareSink<'k, K> {
    pub fn new(inner: &'k mut K, tap: Option<ShareTap>) -> ShareSink<'k, K> {
        ShareSink { inner, tap }
    }
}

impl<K: SnapshotSink> SnapshotSink for ShareSink<'_, K> {
    fn snapshot(&mut self, snap: Arc<Snapshot>, status: &StreamStatus) {
        if let Some(tap) = &mut self.tap {
            tap.offer(&snap);
        }
        self.inner.snapshot(snap, status);
    }

    fn status(&mut self, status: &StreamStatus) {
        self.inner.status(status);
    }

    fn event(&mut self, ev: &crate::event::Event, sources: &SourceTable) {
        if let Some(tap) = &mut self.tap {
            tap.event(ev, sources);
        }
        self.inner.event(ev, sources);
    }
}

/// The publisher's thread, to wait for at the end.
pub struct Publisher {
    thread: std::thread::JoinHandle<()>,
    /// Closed (its sender dropped) when the thread's work ends.
    done: std::sync::mpsc::Receiver<()>,
    pub stats: Arc<ShareStats>,
    pub url: BrokerUrl,
    pub topics: Topics,
}

impl Publisher {
    /// Starts the publisher's thread; it connects in the background (an
    /// absent broker is a link down, not an error). Returns the tap for
    /// the [`ShareSink`].
    pub fn start(settings: ShareSettings) -> Result<(ShareTap, Publisher), ShareError> {
        let client_id = format!("termvel-{}-{}", std::process::id(), settings.topics.prefix().replace('/', "-"));
        let mut options = settings.url.options(&client_id, settings.credentials.as_ref(), &settings.tls)?;
        options.set_last_will(LastWill::new(
            settings.topics.status(),
            serde_json::to_vec(&payload::status("offline")).unwrap_or_default(),
            QoS::AtLeastOnce,
            true,
        ));
        let stats = Arc::new(ShareStats::default());
        let shown = settings.control.as_ref().map(|_| Arc::new(Mutex::new(Vec::new())));
        if settings.control.is_some() {
            *stats.control.lock().unwrap_or_else(|e| e.into_inner()) = Some(ControlCounts::default());
        }
        let snapshots = DropOldest::new(SNAPSHOT_QUEUE);
        let (tx, rx) = mpsc::channel(MESSAGE_QUEUE);
        // Two workers: the connection keeps reading and writing while the
        // other builds a snapshot's JSON.
        let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build()?;
        let work = Work {
            topics: settings.topics.clone(),
            url: settings.url.clone(),
            description: serde_json::to_vec(&settings.description).unwrap_or_default(),
            say: settings.say_on_stderr,
            stats: stats.clone(),
            control: settings.control.zip(shown.clone()),
        };
        let queue = snapshots.clone();
        let (done_tx, done) = std::sync::mpsc::channel::<()>();
        let thread = std::thread::Builder::new().name("termvel-share".into()).spawn(move || {
            rt.block_on(work.run(options, queue, rx));
            drop(done_tx);
        })?;
        let tap = ShareTap {
            snapshots,
            messages: tx,
            stats: stats.clone(),
            alerts: Vec::new(),
            marks: 0,
            health_at: None,
            links: Vec::new(),
            shown,
            events_on: settings.events,
            batch: Vec::new(),
            batch_sources: SourceTable::default(),
            batches: 0,
            batched_events: 0,
        };
        Ok((tap, Publisher { thread, done, stats, url: settings.url, topics: settings.topics }))
    }

    /// Waits for the publisher to drain and end (the tap must be dropped
    /// first), at most [`DRAIN_FOR`] and a little more. This blocks its
    /// thread: inside a runtime, use [`Publisher::finish_async`].
    pub fn finish(self) -> Arc<ShareStats> {
        // Disconnected when the work ends (or the thread panicked).
        let _ = self.done.recv_timeout(DRAIN_FOR + Duration::from_secs(1));
        if self.thread.is_finished() {
            let _ = self.thread.join();
        }
        self.stats
    }

    /// [`Publisher::finish`] without holding a runtime's worker: the wait
    /// runs on the blocking pool, so the screens' and the stream's tasks
    /// go on meanwhile.
    pub async fn finish_async(self) -> Arc<ShareStats> {
        let stats = self.stats.clone();
        tokio::task::spawn_blocking(move || self.finish()).await.unwrap_or(stats)
    }
}

/// The publisher's side.
struct Work {
    topics: Topics,
    url: BrokerUrl,
    description: Vec<u8>,
    say: bool,
    stats: Arc<ShareStats>,
    /// With `--share-accept-control`: the stream's control channel and the
    /// alerts shown now.
    control: Option<(mpsc::Sender<Control>, Shown)>,
}

/// The alerts shown now: written by the tap on the driver's side, read by
/// the connection task to check followers' acknowledgements.
type Shown = Arc<Mutex<Vec<Alert>>>;

/// What the connection task needs to take followers' control messages.
struct ControlDesk {
    topics: Topics,
    client: AsyncClient,
    stream: mpsc::Sender<Control>,
    shown: Shown,
    stats: Arc<ShareStats>,
    say: bool,
}

impl ControlDesk {
    /// Checks one message on a control topic, hands an accepted order to
    /// the stream, counts, says the first refusals, and answers the sender.
    fn take(&self, p: &rumqttc::Publish) {
        let result = {
            let shown = self.shown.lock().unwrap_or_else(|e| e.into_inner());
            requests::check(&self.topics, &p.topic, p.retain, &p.payload, &shown)
        };
        let result = result.and_then(|order| {
            let actions = order.actions();
            // All of an order's actions or none (the acknowledgement
            // without the mark naming its sender would lose who made it).
            let permits = self.stream.try_reserve_many(actions.len()).map_err(|_| Refusal::Busy)?;
            for (permit, a) in permits.zip(actions) {
                permit.send(Control::Operator(a));
            }
            Ok(order)
        });
        let mut counts = self.stats.control.lock().unwrap_or_else(|e| e.into_inner());
        let Some(counts) = counts.as_mut() else { return };
        let line = match &result {
            Ok(order) => {
                counts.accepted(order);
                Some(format!(
                    "termvel: accepted from {}: {}",
                    crate::printable::clipped(&order.from, 64),
                    order.request.describe()
                ))
            }
            Err(r) => counts.refused(&p.topic, r).map(|l| format!("termvel: refused a control message on {l}")),
        };
        if let Some(line) = line {
            if self.say {
                crate::say!("{line}");
            }
            tracing::warn!("{line}");
        }
        // Answer a sender that can be named in a topic (one printable level).
        let Some(to) = self.topics.control_sender(&p.topic) else { return };
        if matches!(result, Err(Refusal::Sender)) {
            return;
        }
        let id = match &result {
            Ok(o) => o.id,
            Err(_) => requests::id_of(&p.payload),
        };
        let body = to_vec(&requests::answer(to, id, &result));
        if self.client.try_publish(self.topics.answers(to), QoS::AtLeastOnce, false, body).is_ok() {
            self.stats.messages_published.fetch_add(1, Ordering::Relaxed);
        } else {
            self.stats.messages_not_shared.fetch_add(1, Ordering::Relaxed);
        }
    }
}

impl Work {
    fn tell(&self, line: String) {
        if self.say {
            crate::say!("{line}");
        }
        tracing::warn!("{line}");
    }

    async fn run(
        self,
        options: rumqttc::MqttOptions,
        snapshots: Arc<DropOldest<Arc<Snapshot>>>,
        mut messages: mpsc::Receiver<Message>,
    ) {
        let (client, mut eventloop) = AsyncClient::new(options, CLIENT_QUEUE);
        eventloop.set_network_options(super::broker::network_options());
        let (link_tx, mut link_rx) = watch::channel(false);
        // The connection: polled on its own task; on an error the link is
        // down, and the next poll reconnects after a growing pause.
        let desk = self.control.as_ref().map(|(stream, shown)| ControlDesk {
            topics: self.topics.clone(),
            client: client.clone(),
            stream: stream.clone(),
            shown: shown.clone(),
            stats: self.stats.clone(),
            say: self.say,
        });
        let conn = {
            let stats = self.stats.clone();
            let url = self.url.display();
            let say = self.say;
            tokio::spawn(async move {
                let mut backoff = BACKOFF_FIRST;
                let mut told_down = false;
                // The disconnect went out: the broker closing the socket is the
                // sign that everything before it was written.
                let mut leaving = false;
                loop {
                    match eventloop.poll().await {
                        Ok(Event::Incoming(Packet::ConnAck(_))) => {
                            backoff = BACKOFF_FIRST;
                            told_down = false;
                            stats.connections.fetch_add(1, Ordering::Relaxed);
                            stats.link_up.store(true, Ordering::Relaxed);
                            let _ = link_tx.send(true);
                            // Clean sessions: subscribe on every connection.
                            if let Some(d) = &desk {
                                let _ = d.client.try_subscribe(d.topics.control_all(), QoS::AtLeastOnce);
                            }
                        }
                        Ok(Event::Incoming(Packet::Publish(p))) => {
                            if let Some(d) = &desk {
                                d.take(&p);
                            }
                        }
                        Ok(Event::Outgoing(Outgoing::Disconnect)) => leaving = true,
                        Ok(_) => {}
                        Err(_) if leaving => break,
                        Err(e) => {
                            let was_up = stats.link_up.swap(false, Ordering::Relaxed);
                            let _ = link_tx.send(false);
                            if was_up || !told_down {
                                stats.link_losses.fetch_add(1, Ordering::Relaxed);
                                let why = describe(&e);
                                let line = format!("termvel: share link down ({url}: {why}); retrying");
                                if say {
                                    crate::say!("{line}");
                                }
                                tracing::warn!("{line}");
                                if let Ok(mut l) = stats.last_error.lock() {
                                    *l = Some(why);
                                }
                                told_down = true;
                            }
                            if matches!(e, ConnectionError::RequestsDone) {
                                break;
                            }
                            tokio::time::sleep(backoff).await;
                            backoff = (backoff * 2).min(BACKOFF_MAX);
                        }
                    }
                }
            })
        };

        let mut up = false;
        let mut held: VecDeque<(Instant, Message)> = VecDeque::new();
        // The latest alert state, republished (retained) on every connection.
        let mut alert_state: Option<Vec<u8>> = None;
        let mut snapshot_seq = 0u64;
        let mut snapshots_open = true;
        let mut messages_open = true;
        let mut tick = tokio::time::interval(Duration::from_millis(100));
        while snapshots_open || messages_open {
            tokio::select! {
                changed = link_rx.changed() => {
                    if changed.is_err() {
                        break;
                    }
                    let now_up = *link_rx.borrow_and_update();
                    if now_up && !up {
                        if self.stats.connections.load(Ordering::Relaxed) > 1 {
                            self.tell(format!("termvel: share link up again ({})", self.url.display()));
                        }
                        self.retained(&client, &self.topics.description(), self.description.clone());
                        self.retained(&client, &self.topics.status(), to_vec(&payload::status("online")));
                        if let Some(a) = &alert_state {
                            self.retained(&client, &self.topics.alerts(), a.clone());
                        }
                    }
                    up = now_up;
                    if up {
                        self.retry(&client, &mut held, &mut alert_state);
                    }
                }
                s = snapshots.pop(), if snapshots_open => match s {
                    Some(s) => {
                        snapshot_seq += 1;
                        if up {
                            let mut body = payload::snapshot(snapshot_seq, &s);
                            body["sent_unix_ns"] = json!(unix_ns());
                            match client.try_publish(self.topics.snapshot(), QoS::AtMostOnce, false, to_vec(&body)) {
                                Ok(()) => self.stats.snapshots_published.fetch_add(1, Ordering::Relaxed),
                                Err(_) => self.stats.snapshots_dropped_slow.fetch_add(1, Ordering::Relaxed),
                            };
                        } else {
                            self.stats.snapshots_dropped_down.fetch_add(1, Ordering::Relaxed);
                        }
                    }
                    None => snapshots_open = false,
                },
                m = messages.recv(), if messages_open => match m {
                    Some(m) => {
                        // Behind what is held, to keep their order.
                        let m = if up && held.is_empty() { self.publish(&client, m, &mut alert_state) } else { Some(m) };
                        let Some(m) = m else { continue };
                        if held.len() >= HOLD_MAX {
                            held.pop_front();
                            self.stats.messages_not_shared.fetch_add(1, Ordering::Relaxed);
                        }
                        held.push_back((Instant::now(), m));
                    }
                    None => messages_open = false,
                },
                _ = tick.tick() => {
                    if up {
                        self.retry(&client, &mut held, &mut alert_state);
                    }
                    while held.front().is_some_and(|(at, _)| at.elapsed() > HOLD_FOR) {
                        held.pop_front();
                        self.stats.messages_not_shared.fetch_add(1, Ordering::Relaxed);
                    }
                }
            }
        }
        // The stream ended: what is still held waits up to DRAIN_FOR for the link.
        let until = tokio::time::Instant::now() + DRAIN_FOR;
        while !held.is_empty() && !up && tokio::time::Instant::now() < until {
            let _ = tokio::time::timeout_at(until, link_rx.changed()).await;
            up = *link_rx.borrow();
        }
        if up {
            while let Some((_, m)) = held.pop_front() {
                if let Some(m) = self.publish(&client, m, &mut alert_state) {
                    held.push_front((Instant::now(), m));
                    if tokio::time::timeout_at(until, tokio::time::sleep(Duration::from_millis(10))).await.is_err() {
                        break;
                    }
                }
            }
            // These two wait (within the bound) for room in the client's
            // queue: the last snapshots may have filled it, and a follower
            // ends on this word.
            let ended = client.publish(self.topics.status(), QoS::AtLeastOnce, true, to_vec(&payload::status("ended")));
            match tokio::time::timeout_at(until, ended).await {
                Ok(Ok(())) => self.stats.messages_published.fetch_add(1, Ordering::Relaxed),
                _ => self.stats.messages_not_shared.fetch_add(1, Ordering::Relaxed),
            };
            let _ = tokio::time::timeout_at(until, client.disconnect()).await;
        }
        self.stats.messages_not_shared.fetch_add(held.len() as u64, Ordering::Relaxed);
        // The connection task ends on the disconnect going out; never wait past the bound.
        let _ = tokio::time::timeout_at(until, conn).await;
    }

    /// Publishes what is held, in order, until the client's queue is full.
    fn retry(&self, client: &AsyncClient, held: &mut VecDeque<(Instant, Message)>, alert_state: &mut Option<Vec<u8>>) {
        while let Some((at, m)) = held.pop_front() {
            if let Some(m) = self.publish(client, m, alert_state) {
                held.push_front((at, m));
                break;
            }
        }
    }

    fn retained(&self, client: &AsyncClient, topic: &str, body: Vec<u8>) {
        if client.try_publish(topic, QoS::AtLeastOnce, true, body).is_err() {
            self.stats.messages_not_shared.fetch_add(1, Ordering::Relaxed);
        }
    }

    /// Publishes `m`; when the client's queue is full, gives it back to be
    /// held and tried again.
    fn publish(&self, client: &AsyncClient, m: Message, alert_state: &mut Option<Vec<u8>>) -> Option<Message> {
        let t = &self.topics;
        let (topic, body, retain) = match &m {
            Message::Alerts(ts, a) => {
                let body = to_vec(&payload::alerts(*ts, a));
                *alert_state = Some(body.clone());
                (t.alerts(), body, true)
            }
            Message::AlertChange(ts, c, a) => (t.alert_change(), to_vec(&payload::alert_change(*ts, c, a)), false),
            Message::Mark(ts, n) => (t.marks(), to_vec(&payload::mark(*ts, *n)), false),
            Message::Health(ts, s) => (t.health(), to_vec(&payload::health(*ts, s)), true),
            Message::Events { seq, before, events, sources } => {
                (t.events(), to_vec(&payload::events(*seq, *before, events, sources)), false)
            }
        };
        match client.try_publish(topic, QoS::AtLeastOnce, retain, body) {
            Ok(()) => {
                self.stats.messages_published.fetch_add(1, Ordering::Relaxed);
                None
            }
            Err(_) => Some(m),
        }
    }
}

fn to_vec(v: &Value) -> Vec<u8> {
    serde_json::to_vec(v).unwrap_or_default()
}

/// Wall-clock now, Unix ns (for followers to measure latency).
pub fn unix_ns() -> i64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_nanos() as i64)
}

/// A link error in the user's words.
pub fn describe(e: &ConnectionError) -> String {
    use rumqttc::ConnectReturnCode as C;
    if let Some(why) = super::broker::certificate_problem(e) {
        return why;
    }
    match e {
        ConnectionError::ConnectionRefused(C::BadUserNamePassword) => {
            "the broker refused the username or password".into()
        }
        // What mosquitto answers a wrong password with, under MQTT 3.1.1.
        ConnectionError::ConnectionRefused(C::NotAuthorized) => {
            "the broker refused the username or password (not authorised)".into()
        }
        ConnectionError::ConnectionRefused(code) => format!("the broker refused the connection ({code:?})"),
        ConnectionError::Io(io) => io.to_string(),
        ConnectionError::Tls(t) => format!("TLS: {t}"),
        other => other.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::alerts::Severity;
    use crate::engine::{Counters, Derived};

    fn tap(events_on: bool) -> (ShareTap, mpsc::Receiver<Message>, Arc<DropOldest<Arc<Snapshot>>>) {
        let snapshots = DropOldest::new(2);
        let (tx, rx) = mpsc::channel(64);
        let tap = ShareTap {
            snapshots: snapshots.clone(),
            messages: tx,
            stats: Arc::new(ShareStats::default()),
            alerts: Vec::new(),
            marks: 0,
            health_at: None,
            links: Vec::new(),
            shown: None,
            events_on,
            batch: Vec::new(),
            batch_sources: SourceTable::default(),
            batches: 0,
            batched_events: 0,
        };
        (tap, rx, snapshots)
    }

    fn snap(t_s: i64, alerts: Vec<Alert>) -> Arc<Snapshot> {
        Arc::new(Snapshot {
            t_ns: t_s * NS_PER_S,
            channels: Vec::new(),
            sources: Vec::new(),
            sources_hidden: 0,
            counters: Counters::default(),
            derived: Derived::default(),
            alerts,
            marks: 0,
            mark_places: Default::default(),
        })
    }

    fn alert(key: &str, raised_s: i64, active: bool, acked: bool) -> Alert {
        Alert {
            key: key.into(),
            severity: Severity::Caution,
            message: format!("{key} message"),
            text: format!("{key} message").into(),
            raised_ns: raised_s * NS_PER_S,
            active,
            acked,
        }
    }

    fn changes(rx: &mut mpsc::Receiver<Message>) -> Vec<(String, &'static str)> {
        std::iter::from_fn(|| rx.try_recv().ok())
            .filter_map(|m| match m {
                Message::AlertChange(_, c, a) => Some((a.key, c)),
                _ => None,
            })
            .collect()
    }

    // Issue 16, item 1: every change of an alert is published once, found
    // by comparing each snapshot's alerts with the one before.
    #[test]
    fn alert_changes_are_found_between_snapshots() {
        let (mut tap, mut rx, _q) = tap(false);
        tap.offer(&snap(1, vec![alert("target", 1, true, false)]));
        assert_eq!(changes(&mut rx), vec![("target".into(), "raised")]);
        tap.offer(&snap(2, vec![alert("target", 1, true, false)]));
        assert_eq!(changes(&mut rx), vec![], "no change, no message");
        tap.offer(&snap(3, vec![alert("target", 1, true, true)]));
        assert_eq!(changes(&mut rx), vec![("target".into(), "acked")]);
        tap.offer(&snap(4, vec![alert("derating", 4, true, false), alert("target", 1, false, true)]));
        assert_eq!(changes(&mut rx), vec![("derating".into(), "raised"), ("target".into(), "cleared")]);
        tap.offer(&snap(5, vec![alert("derating", 4, true, false)]));
        assert_eq!(changes(&mut rx), vec![("target".into(), "gone")]);
        tap.offer(&snap(6, vec![alert("derating", 6, true, false)]));
        assert_eq!(changes(&mut rx), vec![("derating".into(), "raised")], "raised again");
    }

    // Issue 16, item 1: a publisher that does not keep up never makes the
    // driver wait: the oldest waiting snapshot is dropped and counted.
    #[test]
    fn a_full_snapshot_queue_drops_the_oldest_and_counts_it() {
        let (mut tap, _rx, q) = tap(false);
        for t in 1..=5 {
            tap.offer(&snap(t, Vec::new()));
        }
        assert_eq!(tap.stats.snapshots.load(Ordering::Relaxed), 5);
        assert_eq!(tap.stats.snapshots_dropped_slow.load(Ordering::Relaxed), 3);
        drop(tap);
        let rt = tokio::runtime::Builder::new_current_thread().build().unwrap();
        let left: Vec<TimeNs> = rt.block_on(async {
            let mut v = Vec::new();
            while let Some(s) = q.pop().await {
                v.push(s.t_ns / NS_PER_S);
            }
            v
        });
        assert_eq!(left, vec![4, 5], "the newest wait; the queue closes with the tap");
    }

    // Issue 16, item 5: the end of a shared run waited for the publisher
    // (up to its drain bound, with the broker gone) by sleeping on the
    // runtime's own thread, so the screens' and the stream's tasks stood
    // still meanwhile. Now the wait runs off the runtime: a task on a
    // one-thread runtime keeps ticking while the publisher drains.
    #[test]
    fn finishing_inside_a_runtime_does_not_hold_it() {
        let port = std::net::TcpListener::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port();
        let settings = ShareSettings {
            url: BrokerUrl::parse(&format!("mqtt://127.0.0.1:{port}")).unwrap(),
            topics: Topics::new("t").unwrap(),
            credentials: None,
            tls: TlsFiles::default(),
            description: json!({}),
            say_on_stderr: false,
            events: false,
            control: None,
        };
        let (mut tap, publisher) = Publisher::start(settings).unwrap();
        // A message held for a link that never comes: the drain waits its bound.
        tap.offer(&snap(1, vec![alert("target", 1, true, false)]));
        drop(tap);
        let rt = tokio::runtime::Builder::new_current_thread().enable_all().build().unwrap();
        let (ticks, took) = rt.block_on(async {
            let ticks = Arc::new(AtomicU64::new(0));
            let t = ticks.clone();
            let ticker = tokio::spawn(async move {
                loop {
                    tokio::time::sleep(Duration::from_millis(10)).await;
                    t.fetch_add(1, Ordering::Relaxed);
                }
            });
            let started = Instant::now();
            let stats = publisher.finish_async().await;
            ticker.abort();
            assert!(stats.messages_not_shared.load(Ordering::Relaxed) > 0, "the held message was counted");
            (ticks.load(Ordering::Relaxed), started.elapsed())
        });
        assert!(took >= Duration::from_secs(1), "the drain waited for the link ({took:?})");
        let expected = took.as_millis() as u64 / 10;
        assert!(ticks >= expected / 4, "{ticks} ticks in {took:?}: the runtime was held");
    }

    // Issue 16, item 2: raw events go in batches of 100 ms of stream time,
    // numbered, each saying how many events came before it; the last
    // partial batch goes when the tap is dropped; engine notes are not input.
    #[test]
    fn events_are_batched_by_stream_time() {
        use crate::event::{Event, Payload, SESSION};
        let (mut tap, mut rx, _q) = tap(true);
        let sources = SourceTable::default();
        for ms in [0, 50, 99, 100, 150, 260] {
            tap.event(&Event::new(ms * 1_000_000, SESSION, Payload::Tick), &sources);
        }
        tap.event(&Event::new(270_000_000, SESSION, Payload::Note("engine's own".into())), &sources);
        drop(tap);
        let batches: Vec<(u64, u64, usize)> = std::iter::from_fn(|| rx.try_recv().ok())
            .filter_map(|m| match m {
                Message::Events { seq, before, events, .. } => Some((seq, before, events.len())),
                _ => None,
            })
            .collect();
        assert_eq!(batches, vec![(1, 0, 3), (2, 3, 2), (3, 5, 1)]);
    }
}
