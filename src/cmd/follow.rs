//! `termvel follow`: a run shared through an MQTT broker, followed from
//! another station.
//!
//! On the screens (the default) the run is rebuilt here: the retained
//! description gives the config set and the sources, the raw event batches
//! (`--share-events` on the reading station) feed this station's own engine
//! through the real-time driver, so every number on these screens is
//! derived here, and is the reading station's when nothing was lost. The
//! screens are read-only. `--record-dir` records the followed run from the
//! batches (lost batches noted where they were).
//!
//! `--headless` prints every message that passes the checks, one JSON line
//! each, then a summary line; it needs no event batches.

use std::io::Write;
use std::process::ExitCode;
use std::sync::{Arc, Mutex, MutexGuard};
use std::time::Duration;

use serde_json::Value;
use tokio::sync::{mpsc, oneshot, watch};

use crate::cli::FollowArgs;
use crate::engine::{Engine, EngineOptions, Snapshot};
use crate::event::{Event, SourceTable};
use crate::share::follower::{self, FollowReport, FollowSettings, Received};
use crate::share::payload::Kind;
use crate::share::remote::{BatchOrder, RemoteRun, RemoteStats, parse_batch};
use crate::share::requests::{self, Awaiting, Request};
use crate::share::{BrokerUrl, Credentials, TlsFiles, Topics};
use crate::sources::link::SessionClock;
use crate::stream::control::Operator;
use crate::stream::realtime::{self, LiveOptions, LiveOutcome};
use crate::stream::{Control, StreamStatus, latency_histogram};
use crate::ui::app::{App, Mode, SessionInfo, ShareLink};
use crate::ui::frames::UiSink;

/// Events waiting between the broker's task and the engine: at a saturated
/// bus (about 9 000 events a second of stream) some 30 s of stream. A batch
/// that does not fit is not taken (counted, and noted as lost).
pub const INPUT_EVENTS: usize = 1 << 18;

/// What the broker's task hands on, shared with the screens' probe.
struct Intake {
    run: Option<RemoteRun>,
    /// The run's sources as the event lines grow them.
    sources: SourceTable,
    order: BatchOrder,
    /// To the engine; `None` when no engine runs (headless, not recording)
    /// and once following ended (the engine's input closes).
    to_engine: Option<mpsc::Sender<Event>>,
    sources_tx: watch::Sender<SourceTable>,
    described: Option<oneshot::Sender<Result<RemoteRun, String>>>,
    /// Event batches before the description came (nothing to read them with).
    before_description: u64,
    /// The first problems with batches, for stderr.
    problems: Vec<String>,
    link_up: bool,
    /// The reading station's word: online, ended, offline.
    publisher: Option<String>,
    /// Another run began under the topic: following stops.
    new_run: bool,
    /// The publisher's snapshots seen (not shown: a sign the run is going
    /// on while no batch comes).
    snapshots: u64,
    quit: watch::Sender<bool>,
    /// Acknowledgements and marks sent and awaiting their answer
    /// (`--send-from-stdin`, `--send-keys`).
    awaiting: Option<Arc<Mutex<Awaiting>>>,
    /// Headless: answers go to stderr; on the screens to the status line.
    headless: bool,
    /// The latest answer (or its absence) for the status line, and when.
    answer: Option<(String, std::time::Instant)>,
}

/// How long an answer stays on the status line.
const ANSWER_SHOWN: Duration = Duration::from_secs(10);

impl Intake {
    fn take(&mut self, m: &Received<'_>) {
        match m.kind {
            Kind::Description => match &self.run {
                None => {
                    let r = RemoteRun::from_description(m.value);
                    if let Ok(run) = &r {
                        self.sources = run.sources.clone();
                        self.sources_tx.send_replace(run.sources.clone());
                        self.run = Some(run.clone());
                    }
                    if let Some(tx) = self.described.take() {
                        let _ = tx.send(r.map_err(|e| e.to_string()));
                    }
                }
                // Republished on every reconnection: the same run. A new
                // start is another run under the same topic.
                Some(r) if m.value["started_unix_ns"].as_i64() != Some(r.started_unix_ns) => {
                    self.new_run = true;
                    let _ = self.quit.send(true);
                }
                Some(_) => {}
            },
            Kind::Status => self.publisher = m.value["state"].as_str().map(str::to_string),
            Kind::Events => self.events(m.value),
            Kind::Snapshot => self.snapshots += 1,
            Kind::ControlAnswer => {
                let Some(a) = &self.awaiting else { return };
                let line = a.lock().unwrap_or_else(|e| e.into_inner()).answer(m.value);
                if let Some(line) = line {
                    if self.headless {
                        crate::say!("{line}");
                    } else {
                        self.answer = Some((line, std::time::Instant::now()));
                    }
                }
            }
            _ => {}
        }
    }

    fn events(&mut self, v: &Value) {
        let Some(tx) = self.to_engine.clone() else { return };
        if self.run.is_none() {
            self.before_description += 1;
            return;
        }
        if tx.is_closed() {
            return;
        }
        match parse_batch(v, &mut self.sources) {
            Ok(b) => {
                for l in &b.bad_lines {
                    self.problem(l.clone());
                }
                if tx.capacity() < b.events.len() + 1 {
                    // The engine is behind: this batch is not taken, and
                    // the next one taken shows the hole.
                    self.order.stats.dropped_here += 1;
                    return;
                }
                if self.sources_tx.borrow().len() != self.sources.len() {
                    self.sources_tx.send_replace(self.sources.clone());
                }
                for ev in self.order.take(b) {
                    let _ = tx.try_send(ev);
                }
            }
            Err(e) => {
                self.order.stats.bad_batches += 1;
                self.problem(e.to_string());
            }
        }
    }

    fn problem(&mut self, p: String) {
        if self.problems.len() < 10 {
            self.problems.push(p);
        }
    }

    /// The status line's words on the link.
    fn link(&mut self) -> ShareLink {
        let now = std::time::Instant::now();
        if let Some(a) = &self.awaiting
            && let Some(line) = a.lock().unwrap_or_else(|e| e.into_inner()).overdue(now, false).pop()
        {
            self.answer = Some((line, now));
        }
        let s = &self.order.stats;
        let mut words = Vec::new();
        if let Some((line, at)) = &self.answer
            && now - *at < ANSWER_SHOWN
        {
            words.push(line.trim_start_matches("termvel: ").to_string());
        }
        match self.publisher.as_deref() {
            Some("ended") => words.push("run ended".to_string()),
            Some("offline") => words.push("reading station offline".to_string()),
            _ => {}
        }
        if let Some(l) = &s.late {
            let at = l.t_ns.map_or(String::new(), |t| format!(" at {}", crate::ui::format::clock(t)));
            words.push(format!("joined late{at}: sums start there"));
        }
        if self.new_run {
            words.push("another run began under the topic: follow again to see it".to_string());
        }
        if s.batches == 0 && self.snapshots > 0 {
            // The run goes on, its batches do not come (an ACL, a broker
            // limit): say it rather than wait in silence.
            words.push("no event batches received (the run's snapshots are)".to_string());
        }
        if s.batches_lost > 0 {
            words.push(format!("{} batches lost", s.batches_lost));
        }
        ShareLink { up: self.link_up, detail: words.join(" · ") }
    }
}

fn lock(i: &Mutex<Intake>) -> MutexGuard<'_, Intake> {
    i.lock().unwrap_or_else(|e| e.into_inner())
}

pub fn run(args: FollowArgs) -> anyhow::Result<ExitCode> {
    let url = match BrokerUrl::parse(&args.url) {
        Ok(u) => u,
        Err(e) => return super::unusable(e),
    };
    let topics = match Topics::new(&args.topic) {
        Ok(t) => t,
        Err(e) => return super::unusable(e),
    };
    let credentials = match Credentials::load(args.credentials.as_deref()) {
        Ok(c) => c,
        Err(e) => return super::unusable(e),
    };
    // --send-from-stdin, --send-keys: the sender is the broker's username
    // (the ACL's %u names the control topic after it).
    let sending = args.send_from_stdin || args.send_keys;
    let sender = match (&credentials, sending) {
        (Some(c), true) if !requests::usable_sender(&c.username) => {
            return super::unusable(format!(
                "sending to the reading station: the username \"{}\" cannot name a topic level (no '/', '+', '#' or control characters, at most {} bytes)",
                crate::printable::clipped(&c.username, 64),
                requests::MAX_SENDER_BYTES
            ));
        }
        (Some(c), true) => Some(c.username.clone()),
        (None, true) => {
            return super::unusable(
                "--send-from-stdin and --send-keys need a broker username (--credentials, or TERMVEL_SHARE_USERNAME and TERMVEL_SHARE_PASSWORD): the control topic is named after it",
            );
        }
        (_, false) => None,
    };
    let tls = TlsFiles { ca: args.ca.clone(), cert: args.cert.clone(), key: args.key.clone() };
    // The URL with its TLS files, checked before anything runs (exit 2).
    if let Err(e) = url.options("termvel-check", None, &tls) {
        return super::unusable(e);
    }
    let (out_tx, out_rx) = mpsc::channel(64);
    let settings = FollowSettings {
        url: url.clone(),
        topics: topics.clone(),
        credentials,
        tls,
        // On the screens the status line shows the link: a line on stderr
        // would be drawn over them.
        say_on_stderr: args.headless,
        outgoing: sender.as_ref().map(|_| out_rx),
    };
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build()?;
    rt.block_on(follow(args, settings, sender.map(|user| Sending { user, out: out_tx })))
}

/// Where a follower's acknowledgements and marks go: its control topic,
/// named after its username, through the follower's own connection.
struct Sending {
    user: String,
    out: mpsc::Sender<(String, Vec<u8>)>,
}

/// The control topic, the follower's outgoing queue and its requests
/// awaiting an answer.
type KeySending = (String, mpsc::Sender<(String, Vec<u8>)>, Arc<Mutex<Awaiting>>);

/// The screens' operator actions become requests to the reading station
/// (never the local engine's: the station's acknowledgements and marks come
/// back in its event batches); the other controls go on to the driver.
async fn forward_keys(
    mut from_ui: mpsc::Receiver<Control>,
    to_driver: mpsc::Sender<Control>,
    sending: Option<KeySending>,
) {
    while let Some(c) = from_ui.recv().await {
        match c {
            Control::Operator(op) => {
                let Some((topic, out, awaiting)) = &sending else { continue };
                let req = match op {
                    Operator::Ack(key) => Request::Ack(key),
                    Operator::Mark(note) => Request::Mark(Some(note)),
                };
                let body = awaiting.lock().unwrap_or_else(|e| e.into_inner()).send(&req, std::time::Instant::now());
                let _ = out.send((topic.clone(), serde_json::to_vec(&body).unwrap_or_default())).await;
            }
            other => {
                if to_driver.send(other).await.is_err() {
                    break;
                }
            }
        }
    }
}

/// What the broker's task ends with: its report (or why it failed), and
/// the headless output, to close with the summary.
type FollowDone = (Result<FollowReport, follower::FollowError>, Printer);

/// Headless output: each accepted message as one JSON line, written whole
/// and flushed so a reader sees it when it comes.
struct Printer {
    out: std::io::BufWriter<std::io::Stdout>,
    on: bool,
    broken: bool,
}

impl Printer {
    fn line(&mut self, v: &Value) {
        if self.on
            && !self.broken
            && (serde_json::to_writer(&mut self.out, v).is_err()
                || self.out.write_all(b"\n").is_err()
                || self.out.flush().is_err())
        {
            self.broken = true;
        }
    }
}

async fn follow(args: FollowArgs, settings: FollowSettings, sending: Option<Sending>) -> anyhow::Result<ExitCode> {
    let (url, prefix) = (settings.url.display(), settings.topics.prefix().to_string());
    let awaiting = sending.as_ref().map(|s| {
        // Numbers from the wall clock in ms: two sessions of one user do
        // not take each other's answers.
        let first_id = (crate::share::publisher::unix_ns() / 1_000_000).max(0) as u64;
        Arc::new(Mutex::new(Awaiting::new(&s.user, first_id)))
    });
    let control_topic = sending.as_ref().map(|s| settings.topics.control(&s.user));
    if args.send_from_stdin
        && let (Some(s), Some(a), Some(topic)) = (&sending, &awaiting, &control_topic)
    {
        let (topic, a, out) = (topic.clone(), a.clone(), s.out.clone());
        // A thread of its own: reading standard input blocks.
        std::thread::spawn(move || requests::send_lines(std::io::stdin().lock(), &topic, &a, &out));
        tokio::spawn(requests::say_overdue(awaiting.clone().expect("awaiting")));
    }
    // The engine runs on the screens, and headless when recording.
    let engine_wanted = !args.headless || args.record_dir.is_some();
    let (ev_tx, ev_rx) = mpsc::channel(INPUT_EVENTS);
    let (sources_tx, sources_rx) = watch::channel(SourceTable::default());
    let (desc_tx, mut desc_rx) = oneshot::channel();
    let (quit_tx, mut quit_rx) = watch::channel(false);
    let intake = Arc::new(Mutex::new(Intake {
        run: None,
        sources: SourceTable::default(),
        order: BatchOrder::default(),
        to_engine: engine_wanted.then_some(ev_tx),
        sources_tx,
        described: Some(desc_tx),
        before_description: 0,
        problems: Vec::new(),
        link_up: false,
        publisher: None,
        new_run: false,
        snapshots: 0,
        quit: quit_tx.clone(),
        awaiting: awaiting.clone(),
        headless: args.headless,
        answer: None,
    }));
    let limit = args.for_ns.map(|ns| Duration::from_nanos(ns as u64));
    let mut printer = Printer { out: std::io::BufWriter::new(std::io::stdout()), on: args.headless, broken: false };
    let mut follow_task = {
        let (on_link, on_msg, done) = (intake.clone(), intake.clone(), intake.clone());
        let (url, prefix) = (url.clone(), prefix.clone());
        tokio::spawn(async move {
            let stop = async move {
                let for_limit = async {
                    match limit {
                        Some(d) => tokio::time::sleep(d).await,
                        None => std::future::pending().await,
                    }
                };
                tokio::select! {
                    _ = for_limit => {}
                    _ = tokio::signal::ctrl_c() => {}
                    _ = quit_rx.wait_for(|q| *q) => {}
                }
            };
            let r = follower::follow_with_link(
                settings,
                || crate::say!("termvel: following {url} under {prefix}/"),
                |up| lock(&on_link).link_up = up,
                |m| {
                    printer.line(m.value);
                    lock(&on_msg).take(&m);
                },
                stop,
            )
            .await;
            // The engine's input ends with the following.
            lock(&done).to_engine = None;
            (r, printer) as FollowDone
        })
    };

    if !engine_wanted {
        let done = follow_task.await?;
        return finish_headless(done, &intake, (&url, &prefix), None);
    }

    // The run's description first: the engine and the screens need its config.
    if !args.headless {
        crate::say!("termvel: waiting for the shared run's description under {prefix}/ (Ctrl-C to stop)");
    }
    let described = tokio::select! {
        d = &mut desc_rx => d.ok(),
        done = &mut follow_task => {
            let done = done?;
            if args.headless {
                return finish_headless(done, &intake, (&url, &prefix), None);
            }
            if let Err(e) = done.0 {
                crate::say!("termvel: {e}");
                return Ok(ExitCode::from(super::EXIT_FAILED));
            }
            return super::unusable(format!("no shared run under {prefix}/ on {url}: no description came"));
        }
    };
    let run = match described {
        Some(Ok(run)) if run.event_batches => run,
        other => {
            let why = match other {
                Some(Err(e)) => e,
                _ => format!(
                    "the shared run under {prefix}/ carries no event batches, so this station cannot derive it on its own engine{}: start the reading station with --share-events (or follow with --headless)",
                    if args.headless { " or record it" } else { "" }
                ),
            };
            crate::say!("termvel: {why}");
            if args.headless {
                // Headless follows without batches; only the recording asked for is not made.
                lock(&intake).to_engine = None;
                let done = follow_task.await?;
                let code = finish_headless(done, &intake, (&url, &prefix), None)?;
                return Ok(if code == ExitCode::SUCCESS { ExitCode::from(super::EXIT_UNUSABLE) } else { code });
            }
            let _ = quit_tx.send(true);
            let _ = follow_task.await;
            return Ok(ExitCode::from(super::EXIT_UNUSABLE));
        }
    };
    let config = Arc::new(run.config.clone());
    let recorder = match &args.record_dir {
        Some(dir) => match crate::record::create_recording(dir, "follow", &config, &run.sources) {
            Ok((w, p)) => {
                crate::say!("termvel: recording to {}", p.display());
                Some((w, p))
            }
            Err(e) => {
                let _ = quit_tx.send(true);
                let _ = follow_task.await;
                return super::unusable(format!("cannot create a recording in {}: {e}", dir.display()));
            }
        },
        None => None,
    };
    let opts = LiveOptions {
        engine: Engine::new(config.clone(), EngineOptions { snapshot_every_ns: run.snapshot_every_ns }),
        sources: run.sources.clone(),
        clock: SessionClock::start(),
        recorder,
        latency: None,
        duration: None,
    };
    let (ctl_tx, ctl_rx) = mpsc::channel(64);
    let (stop_tx, _stop_rx) = watch::channel(false);

    if args.headless {
        let driver = tokio::spawn(async move {
            let mut sink = |_s: Arc<Snapshot>, _st: &StreamStatus| {};
            realtime::follow(opts, ev_rx, sources_rx, ctl_rx, stop_tx, &mut sink).await
        });
        let done = follow_task.await?;
        drop(ctl_tx);
        let outcome = driver.await?;
        return finish_headless(done, &intake, (&url, &prefix), Some(&outcome));
    }

    let (frames_tx, frames_rx) = watch::channel(None);
    let (done_tx, done_rx) = oneshot::channel();
    let (closed_tx, mut closed_rx) = watch::channel(false);
    let driver = tokio::spawn(async move {
        let mut ui = UiSink::new(frames_tx);
        let out = realtime::follow(opts, ev_rx, sources_rx, ctl_rx, stop_tx, &mut ui).await;
        let _ = done_tx.send(());
        // The run ended (the publisher said so): the screens keep its last
        // frame until the user quits. The sink lives until then: a closed
        // channel would wake the screens' loop at once, over and over.
        let _ = closed_rx.wait_for(|c| *c).await;
        drop(ui);
        out
    });
    let _log = super::init_log_file();
    let mut app = App::new(
        SessionInfo { mode: Mode::Follow { topic: prefix.clone(), sends: args.send_keys }, config: config.clone() },
        crate::ui::theme::Theme::from_env(),
    );
    let probe = intake.clone();
    app.share_probe = Some(Box::new(move || lock(&probe).link()));
    let (keys_tx, keys_rx) = mpsc::channel(64);
    let keys = match (&sending, &awaiting, &control_topic) {
        (Some(s), Some(a), Some(topic)) if args.send_keys => Some((topic.clone(), s.out.clone(), a.clone())),
        _ => None,
    };
    tokio::spawn(forward_keys(keys_rx, ctl_tx, keys));
    let ui_result = crate::ui::run(app, frames_rx, keys_tx, latency_histogram(), done_rx).await;
    let _ = closed_tx.send(true);
    let _ = quit_tx.send(true);
    let (report, _) = follow_task.await?;
    let outcome = tokio::time::timeout(Duration::from_secs(10), driver).await;
    crate::say!("{}", ui_result?.line());
    let outcome = match outcome {
        Ok(Ok(o)) => o,
        Ok(Err(e)) => return Err(anyhow::anyhow!("the engine's task failed: {e}")),
        Err(_) => return Err(anyhow::anyhow!("the engine's task did not stop within 10 s")),
    };
    let report = match report {
        Ok(r) => r,
        Err(e) => {
            crate::say!("termvel: {e}");
            return Ok(ExitCode::from(super::EXIT_FAILED));
        }
    };
    let complete = say_received(&report, &intake, &url, &prefix, Some(&outcome));
    Ok(super::code(complete))
}

/// Says on stderr what was refused, received and lost, and where the
/// recording went; true when the recording (if any) holds every event
/// received.
fn say_received(
    report: &FollowReport,
    intake: &Mutex<Intake>,
    url: &str,
    prefix: &str,
    outcome: Option<&LiveOutcome>,
) -> bool {
    for r in &report.refusals {
        crate::say!("termvel: refused a message on {r}");
    }
    let i = lock(intake);
    for p in &i.problems {
        crate::say!("termvel: {p}");
    }
    if i.new_run {
        crate::say!("termvel: another run began under {prefix}/: following stopped (follow again to see it)");
    }
    let Some(outcome) = outcome else { return true };
    if i.before_description > 0 {
        crate::say!(
            "termvel: {} event batches came before the run's description and could not be read",
            i.before_description
        );
    }
    let s = &i.order.stats;
    crate::say!("termvel: followed {url} under {prefix}/: {} event batches ({} events) taken", s.batches, s.events);
    if let Some(l) = &s.late {
        crate::say!("termvel: joined late: {}", l.note().trim_start_matches("share: "));
    }
    if s.batches_lost > 0 || s.dropped_here > 0 {
        crate::say!(
            "termvel: {} event batches ({} events) lost in {} gaps ({} of them not taken here in time); the recording notes each gap",
            s.batches_lost,
            s.events_lost,
            s.gaps.len(),
            s.dropped_here
        );
    }
    super::report_recording(&outcome.recording)
}

/// Closes a headless follow: the summary line (with `remote`, what the
/// engine took, when recording), stderr, the exit status.
fn finish_headless(
    (result, mut printer): FollowDone,
    intake: &Mutex<Intake>,
    (url, prefix): (&str, &str),
    outcome: Option<&LiveOutcome>,
) -> anyhow::Result<ExitCode> {
    let report = match result {
        Ok(r) => r,
        Err(e) => {
            crate::say!("termvel: {e}");
            return Ok(ExitCode::from(super::EXIT_FAILED));
        }
    };
    let complete = say_received(&report, intake, url, prefix, outcome);
    if !printer.broken {
        let mut follow = report.json();
        if let Some(a) = &lock(intake).awaiting {
            let mut a = a.lock().unwrap_or_else(|e| e.into_inner());
            for line in a.overdue(std::time::Instant::now(), true) {
                crate::say!("{line}");
            }
            follow["control"] = a.json();
        }
        if let Some(o) = outcome {
            let stats: RemoteStats = lock(intake).order.stats.clone();
            follow["remote"] = stats.json();
            if let Some(r) = super::recording_summary(&o.recording) {
                follow["recording"] = serde_json::to_value(r).unwrap_or_default();
            }
        }
        printer.on = true;
        printer.line(&serde_json::json!({ "summary": { "follow": follow } }));
    }
    Ok(super::code(complete))
}

#[cfg(test)]
mod tests {
    use super::*;

    // Issue 16, item 2: a follower's `a`/`m` go to its control topic as
    // numbered requests, never to its own engine; the other controls (quit)
    // go on to the driver.
    #[tokio::test]
    async fn the_screens_keys_become_requests_and_quit_goes_to_the_driver() {
        let (ui_tx, ui_rx) = mpsc::channel(8);
        let (drv_tx, mut drv_rx) = mpsc::channel(8);
        let (out_tx, mut out_rx) = mpsc::channel(8);
        let awaiting = Arc::new(Mutex::new(Awaiting::new("pit-eng", 7)));
        let task =
            tokio::spawn(forward_keys(ui_rx, drv_tx, Some(("run/control/pit-eng".into(), out_tx, awaiting.clone()))));
        ui_tx.send(Control::Operator(Operator::Ack("derating".into()))).await.unwrap();
        ui_tx.send(Control::Operator(Operator::Mark("boost late".into()))).await.unwrap();
        ui_tx.send(Control::Quit).await.unwrap();
        drop(ui_tx);
        task.await.unwrap();
        let (topic, body) = out_rx.recv().await.unwrap();
        assert_eq!(topic, "run/control/pit-eng");
        let v: Value = serde_json::from_slice(&body).unwrap();
        assert_eq!((v["kind"].as_str(), v["key"].as_str(), v["id"].as_u64()), (Some("ack"), Some("derating"), Some(7)));
        let (_, body) = out_rx.recv().await.unwrap();
        let v: Value = serde_json::from_slice(&body).unwrap();
        assert_eq!(
            (v["kind"].as_str(), v["note"].as_str(), v["id"].as_u64()),
            (Some("mark"), Some("boost late"), Some(8))
        );
        assert!(matches!(drv_rx.recv().await, Some(Control::Quit)));
        assert!(drv_rx.recv().await.is_none(), "nothing else reached the driver");
        assert_eq!(awaiting.lock().unwrap().sent, 2);
    }
}
