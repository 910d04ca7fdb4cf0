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
use crate::stream::paced::{self, PlayerOptions, PlayerOutcome};
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
    let (tap, publisher) = match super::sharing::start(&spec.run, spec.command, &spec.config, src.sources()) {
        Ok(s) => s,
        Err(reason) => return super::unusable(reason),
    };
    let recorder = match start_recording(&spec.run, spec.command, &spec.config, src.sources()) {
        Ok(r) => r,
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
            recorder,
            latency: None,
        };
        let stdout = std::io::stdout();
        let mut printer = JsonPrinter::new(std::io::BufWriter::new(stdout.lock()));
        let rt = tokio::runtime::Builder::new_current_thread().enable_time().build()?;
        let (_tx, rx) = mpsc::channel(16);
        let mut sink = ShareSink::new(&mut printer, tap);
        let outcome = rt.block_on(paced::play(src, make_engine, popts, rx, &mut sink))?;
        drop(sink);
        let mut summary = summarise(&outcome).json();
        if let Some(share) = super::sharing::finish(publisher) {
            summary["share"] = share;
        }
        printer.finish_json(&summary);
        drop(printer);
        return finish(&spec, &outcome);
    }

    // On the screens: the player in its own task, the UI on this one.
    let _log = init_log_file();
    let latency = latency_histogram();
    let popts = PlayerOptions {
        speed: spec.speed.unwrap_or(1.0),
        start_paused: spec.paused,
        hold_at_end: true,
        recorder,
        latency: Some(latency.clone()),
    };
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build()?;
    let (frames_tx, frames_rx) = watch::channel(None);
    let (ctl_tx, ctl_rx) = mpsc::channel(64);
    let (done_tx, done_rx) = oneshot::channel();
    let app = App::new(
        SessionInfo { mode: spec.mode.clone(), config: spec.config.clone() },
        crate::ui::theme::Theme::from_env(),
    );
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
    crate::say!("{}", ui_result?.line());
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
    report_recording(&o.recording);
    Ok(ExitCode::SUCCESS)
}

/// The closing summary of a played stream.
pub fn summarise(o: &PlayerOutcome) -> Summary {
    let snap_counters = o.engine.snapshot_at(o.engine.now_ns().unwrap_or(0), &o.sources).counters;
    let mut s = Summary::from_counters(&snap_counters);
    s.snapshots = o.snapshots;
    s.malformed_lines = o.read_stats.malformed;
    s.time_reversals = o.read_stats.time_reversals;
    s.torn_tail = o.read_stats.torn_tail.is_some();
    s.torn_tail_line = o.read_stats.torn_tail.as_ref().map(|t| t.line);
    s
}

/// Tells the user, on stderr, what was skipped and where.
pub fn report_read_problems(file: &Path, o: &PlayerOutcome) {
    let st = &o.read_stats;
    for e in st.errors.iter().take(10) {
        crate::say!("termvel: {}:{}: skipped: {}", file.display(), e.line, e.message);
    }
    if st.malformed > 10 {
        crate::say!("termvel: … and {} more malformed lines", st.malformed - 10);
    }
    if let Some((line, back)) = st.first_reversal {
        crate::say!(
            "termvel: {}:{line}: time goes back {:.3} s from the event before ({} such events in all); events are applied in file order",
            file.display(),
            back as f64 * 1e-9,
            st.time_reversals
        );
    }
    // Lines a source sent that did not parse (counted, alerted, kept in
    // the recording) and derived values that were not finite.
    for (id, s) in o.sources.iter() {
        let d = o.engine.decoder.source_stats(id);
        if d.parse_errors > 0 {
            crate::say!(
                "termvel: {}: {} bad lines from {} (last: {})",
                file.display(),
                d.parse_errors,
                s.name,
                d.last_error.unwrap_or_default()
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
    if let Some(t) = &st.torn_tail {
        crate::say!(
            "termvel: {}:{}: the last line is torn ({} bytes without a line end, e.g. a power loss); everything before it was replayed",
            file.display(),
            t.line,
            t.bytes
        );
    }
}
