//! Playing a finite event stream (a replay, a rehearsal) to its end: on
//! the screens or headless, recording unless told not to. Shared by
//! `replay` and `rehearse`; the stream itself runs in
//! [`crate::stream::paced`].

use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::Arc;

use tokio::sync::{mpsc, oneshot, watch};

use super::{init_log_file, report_recording, start_recording};
use crate::cli::RunOpts;
use crate::config::ConfigSet;
use crate::engine::{Engine, EngineOptions};
use crate::headless::Summary;
use crate::share::ShareSink;
use crate::sources::EventSource;
use crate::stream::paced::{self, PlayerOptions, PlayerOutcome, SharedHistory};
use crate::stream::{JsonPrinter, latency_histogram};
use crate::ui;
use crate::ui::app::{App, Mode, SessionInfo};
use crate::ui::frames::UiSink;

/// How to play a stream.
pub struct PlaySpec {
    pub mode: Mode,
    /// The word in the recording's file name.
    pub command: &'static str,
    pub run: RunOpts,
    pub config: Arc<ConfigSet>,
    /// Initial pace; `None`: x1 on the screens, as fast as possible headless.
    pub speed: Option<f64>,
    pub paused: bool,
    /// The file read, for messages about skipped lines.
    pub file: Option<PathBuf>,
}

/// Runs `src` to its end (headless) or until the user quits (screens).
pub fn run<S: EventSource + 'static>(src: S, spec: PlaySpec) -> anyhow::Result<ExitCode> {
    // A file that is not events is refused before anything starts: no
    // screen waiting for data that never comes, no empty recording.
    if let Some(f) = &spec.file
        && let Err(e) = crate::sources::FileSource::probe(f)
    {
        if let Some(st) = e.read_stats() {
            report_read_stats(f, st, false);
        }
        return super::unusable(e);
    }
    // The screens' remembered settings: a malformed file is refused here,
    // before a recording starts.
    let settings = match crate::ui::settings::for_session(spec.run.headless) {
        Ok(l) => l,
        Err(e) => return super::unusable(e),
    };
    // Issue 16, item 5: the recording first; sharing starts only for a
    // run that will happen (a refused recording left a retained `online`).
    let recorder = match start_recording(&spec.run, spec.command, &spec.config, src.sources()) {
        Ok(r) => r,
        Err(reason) => return super::unusable(reason),
    };
    // The stream's controls: the screens' keys, and followers' accepted
    // acknowledgements and marks (--share-accept-control).
    let (ctl_tx, ctl_rx) = mpsc::channel(64);
    let (tap, publisher) = match super::sharing::start(&spec.run, spec.command, &spec.config, src.sources(), &ctl_tx) {
        Ok(s) => s,
        Err(reason) => return super::unusable(reason),
    };
    let opts = EngineOptions { snapshot_every_ns: spec.run.every };
    let make_engine = {
        let config = spec.config.clone();
        move || Engine::new(config.clone(), opts.clone())
    };
    if spec.run.headless {
        let popts = PlayerOptions {
            speed: spec.speed.unwrap_or(f64::INFINITY),
            start_paused: false,
            hold_at_end: false,
            // Headless runs take no keys: nothing seeks, so memory stays flat.
            keep_checkpoints: false,
            recorder,
            latency: None,
            history: None,
        };
        let stdout = std::io::stdout();
        let mut printer = JsonPrinter::new(std::io::BufWriter::new(stdout.lock()));
        let rt = tokio::runtime::Builder::new_current_thread().enable_time().build()?;
        let mut sink = ShareSink::new(&mut printer, tap);
        let outcome = rt.block_on(paced::play(src, make_engine, popts, ctl_rx, &mut sink));
        drop(ctl_tx);
        let outcome = outcome?;
        drop(sink);
        let mut summary = summary_json(&outcome);
        if let Some(share) = super::sharing::finish(publisher) {
            summary["share"] = share;
        }
        printer.finish_json(&summary);
        let out_error = printer.take_error();
        drop(printer);
        let code = finish(&spec, &outcome)?;
        if let Some(e) = out_error {
            return super::failed(super::stdout_error(&e));
        }
        return Ok(code);
    }

    // On the screens: the player in its own task, the UI on this one.
    let _log = init_log_file();
    if let Some(n) = &settings.note {
        tracing::info!("{n}");
    }
    let latency = latency_histogram();
    let history = SharedHistory::default();
    let popts = PlayerOptions {
        speed: spec.speed.unwrap_or(1.0),
        start_paused: spec.paused,
        hold_at_end: true,
        keep_checkpoints: true,
        recorder,
        latency: Some(latency.clone()),
        history: Some(history.clone()),
    };
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build()?;
    let (frames_tx, frames_rx) = watch::channel(None);
    let (done_tx, done_rx) = oneshot::channel();
    let mut app = App::new(
        SessionInfo { mode: spec.mode.clone(), config: spec.config.clone() },
        crate::ui::theme::Theme::from_env(),
    );
    app.history = Some(history);
    app.units = settings.settings.units;
    app.share_probe = super::sharing::probe(&publisher);
    let outcome = rt.block_on(async move {
        let player = tokio::spawn(async move {
            let mut ui = UiSink::new(frames_tx);
            let mut sink = ShareSink::new(&mut ui, tap);
            let r = paced::play(src, make_engine, popts, ctl_rx, &mut sink).await;
            let _ = done_tx.send(());
            r
        });
        let ui_result = ui::run(app, frames_rx, ctl_tx, latency, done_rx).await;
        let outcome = tokio::time::timeout(std::time::Duration::from_secs(10), player).await;
        (ui_result, outcome)
    });
    let (ui_result, outcome) = outcome;
    super::sharing::finish(publisher);
    super::draw_stats(&ui_result?, spec.run.verbose);
    match outcome {
        Ok(Ok(Ok(o))) => finish(&spec, &o),
        Ok(Ok(Err(e))) => Err(e.into()),
        Ok(Err(e)) => Err(anyhow::anyhow!("the player failed: {e}")),
        Err(_) => Err(anyhow::anyhow!("the player did not stop within 10 s")),
    }
}

fn finish(spec: &PlaySpec, o: &PlayerOutcome) -> anyhow::Result<ExitCode> {
    if let Some(f) = &spec.file {
        report_read_problems(f, o);
        if o.read_stats.events == 0 {
            return super::unusable(format!(
                "{}: no valid event in the file: not a termvel recording or candump log",
                f.display()
            ));
        }
    }
    let code = super::code(report_recording(&o.recording));
    for ev in &o.unrecorded {
        // Made after a seek back, behind the end of the recording: said
        // here, since the recording could not take it in time order.
        let what = match &ev.payload {
            crate::event::Payload::Ack(k) if k == "*" => "acknowledgement of every alert".to_string(),
            crate::event::Payload::Ack(k) => format!("acknowledgement of {k}"),
            _ => "operator event".to_string(),
        };
        crate::say!(
            "termvel: {what} at stream time {:.1} s was not recorded: the recording had already passed that place",
            ev.t_ns as f64 * 1e-9
        );
    }
    Ok(code)
}

/// The closing summary of a played stream.
pub fn summarise(o: &PlayerOutcome) -> Summary {
    let snap_counters = o.engine.snapshot_at(o.engine.now_ns().unwrap_or(0), &o.sources).counters;
    let mut s = Summary::from_counters(&snap_counters);
    s.snapshots = o.snapshots;
    s.malformed_lines = o.read_stats.malformed;
    s.time_reversals = o.read_stats.time.time_reversals;
    s.torn_tail = o.read_stats.torn_tail.is_some();
    s.torn_tail_line = o.read_stats.torn_tail.as_ref().map(|t| t.line);
    s.recording = super::recording_summary(&o.recording);
    s
}

/// The closing summary as JSON, with what putting the file's times in
/// order found (`time_order`).
pub fn summary_json(o: &PlayerOutcome) -> serde_json::Value {
    let mut j = summarise(o).json();
    j["summary"]["time_order"] = serde_json::to_value(o.read_stats.time).unwrap_or_default();
    j
}

/// Tells the user, on stderr, what was skipped and where.
pub fn report_read_problems(file: &Path, o: &PlayerOutcome) {
    report_read_stats(file, &o.read_stats, true);
    let file_s = crate::printable::printable(&file.display().to_string()).into_owned();
    let file = std::path::Path::new(&file_s);
    // Lines a source sent that did not parse (counted, alerted, kept in
    // the recording) and derived values that were not finite.
    for (id, s) in o.sources.iter() {
        let d = o.engine.decoder.source_stats(id);
        if d.parse_errors > 0 {
            crate::say!(
                "termvel: {}: {} bad lines from {} (last: {})",
                file.display(),
                d.parse_errors,
                crate::printable::clipped(&s.name, 64),
                crate::printable::clipped(&d.last_error.unwrap_or_default(), 200)
            );
        }
    }
    if o.engine.counters.rejected_values > 0 {
        crate::say!(
            "termvel: {}: {} derived values were not finite and were rejected (not shown, not used)",
            file.display(),
            o.engine.counters.rejected_values
        );
    }
}

/// Tells the user, on stderr, which lines of `file` were skipped and where,
/// whether time went back, and whether the last line is torn (`replayed`:
/// whether what came before was played, or the file refused).
fn report_read_stats(file: &Path, st: &crate::record::ReadStats, replayed: bool) {
    let file_s = crate::printable::printable(&file.display().to_string()).into_owned();
    for e in st.errors.iter().take(10) {
        crate::say!("termvel: {file_s}:{}: skipped: {}", e.line, e.message);
    }
    if st.malformed > 10 {
        crate::say!("termvel: … and {} more malformed lines", st.malformed - 10);
    }
    for line in st.time.describe(&file_s) {
        crate::say!("termvel: {line}");
    }
    if let Some(t) = &st.torn_tail {
        crate::say!(
            "termvel: {file_s}:{}: the last line is torn ({} bytes without a line end, e.g. a power loss){}",
            t.line,
            t.bytes,
            if replayed { "; everything before it was replayed" } else { "" }
        );
    }
}
