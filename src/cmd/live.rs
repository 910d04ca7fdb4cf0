//! `termvel live`: SocketCAN interfaces and serial ports, several at once,
//! on the screens or headless, recorded.

use std::process::ExitCode;
use std::sync::Arc;

use tokio::sync::{mpsc, oneshot, watch};

use super::{init_log_file, report_recording, start_recording};
use crate::cli::LiveArgs;
use crate::config::ConfigSet;
use crate::engine::{Engine, EngineOptions};
use crate::event::{CanId, SourceKind, SourceTable};
use crate::headless::Summary;
use crate::share::ShareSink;
use crate::sources::link::{INPUT_CAPACITY, SessionClock};
use crate::sources::{serial_port, socketcan};
use crate::stream::realtime::{self, LiveOptions, LiveOutcome};
use crate::stream::{Control, JsonPrinter, latency_histogram};
use crate::ui::app::{App, Mode, SessionInfo};
use crate::ui::frames::UiSink;

pub fn run(args: LiveArgs) -> anyhow::Result<ExitCode> {
    if args.can.is_empty() && args.serial.is_empty() {
        return super::unusable(
            "live needs at least one input: --can IFACE or --serial PATH[,baud=N][,proto=nmea|slcan|lines]",
        );
    }
    let config = if args.run.config.is_empty() {
        crate::say!(
            "termvel: no --config given: using the built-in demo set (its signal map decodes the demo car only)"
        );
        ConfigSet::embedded()
    } else {
        match ConfigSet::load(&args.run.config) {
            Ok(c) => c,
            Err(e) => return super::unusable(e),
        }
    };
    config.alerts.deprecated.iter().for_each(|w| crate::say!("termvel: {w}"));
    let config = Arc::new(config);
    // The session's sources, named once, in the order given.
    let mut sources = SourceTable::default();
    let mut names = std::collections::BTreeSet::new();
    let mut can = Vec::new();
    for iface in &args.can {
        if !names.insert(iface.clone()) {
            return super::unusable(format!("--can {iface} is given twice"));
        }
        if let Err(why) = can_interface_usable(iface) {
            return super::unusable(format!("--can {iface}: {why}"));
        }
        can.push((iface.clone(), sources.try_intern(iface, SourceKind::Can)?));
    }
    let mut ser = Vec::new();
    // One device, one reader: two readers of one port would each get part
    // of its bytes. Compared after resolving links (/dev/serial/by-id/…).
    let mut devices: std::collections::HashMap<std::path::PathBuf, &str> = std::collections::HashMap::new();
    for spec in &args.serial {
        let device = std::fs::canonicalize(&spec.path).unwrap_or_else(|_| spec.path.clone().into());
        if let Some(first) = devices.insert(device.clone(), &spec.path) {
            let same = if first == spec.path { String::new() } else { format!(" (as {first} and {})", spec.path) };
            return super::unusable(format!(
                "--serial: device {} is given twice{same}; a port feeds one input",
                device.display()
            ));
        }
    }
    for (i, spec) in args.serial.iter().enumerate() {
        let name = spec.source_name(i);
        if !names.insert(name.clone()) {
            return super::unusable(format!("two inputs are called {name}: give one of them name=…"));
        }
        ser.push((spec.clone(), sources.try_intern(&name, spec.proto.source_kind())?));
    }
    let ids: Option<Vec<CanId>> =
        if args.all_ids { None } else { Some(config.signals.messages.iter().map(|m| m.id).collect()) };
    // The screens' remembered settings: a malformed file is refused here,
    // before a recording starts.
    let settings = match crate::ui::settings::for_session(args.run.headless) {
        Ok(l) => l,
        Err(e) => return super::unusable(e),
    };
    // Issue 16, item 5: the recording first; sharing starts only for a
    // run that will happen.
    let recorder = match start_recording(&args.run, "live", &config, &sources) {
        Ok(r) => r,
        Err(reason) => return super::unusable(reason),
    };
    let (ctl_tx, ctl_rx) = mpsc::channel(64);
    let (tap, publisher) = match super::sharing::start(&args.run, "live", &config, &sources, &ctl_tx) {
        Ok(s) => s,
        Err(reason) => return super::unusable(reason),
    };
    let _log = if args.run.headless { None } else { init_log_file() };
    if let Some(n) = &settings.note {
        tracing::info!("{n}");
    }
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build()?;
    let (outcome, out_error): (LiveOutcome, Option<std::io::Error>) = rt.block_on(async {
        let clock = SessionClock::start();
        let (tx, rx) = mpsc::channel(INPUT_CAPACITY);
        let (stop_tx, stop_rx) = watch::channel(false);
        for (iface, id) in &can {
            let spec = socketcan::CanSpec { iface: iface.clone(), ids: ids.clone() };
            tokio::spawn(socketcan::run(spec, *id, clock, tx.clone(), stop_rx.clone()));
        }
        for (spec, id) in &ser {
            tokio::spawn(serial_port::run(spec.clone(), *id, clock, tx.clone(), stop_rx.clone()));
        }
        drop(tx);
        let latency = latency_histogram();
        let verbose = args.run.verbose;
        let live = LiveOptions {
            engine: Engine::new(config.clone(), EngineOptions { snapshot_every_ns: args.run.every }),
            sources: sources.clone(),
            clock,
            recorder,
            latency: Some(latency.clone()),
            duration: args.for_ns.map(|ns| std::time::Duration::from_nanos(ns as u64)),
        };
        if args.run.headless {
            // Ctrl-C, SIGTERM and SIGHUP end the session cleanly (the recording is closed).
            let ctl = ctl_tx.clone();
            tokio::spawn(async move {
                let mut term = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()).ok();
                let mut hup = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::hangup()).ok();
                tokio::select! {
                    _ = tokio::signal::ctrl_c() => {}
                    _ = async { if let Some(t) = term.as_mut() { t.recv().await; } else { std::future::pending::<()>().await } } => {}
                    _ = async { if let Some(h) = hup.as_mut() { h.recv().await; } else { std::future::pending::<()>().await } } => {}
                }
                let _ = ctl.send(Control::Quit).await;
            });
            let stdout = std::io::stdout();
            let mut printer = JsonPrinter::new(std::io::BufWriter::new(stdout.lock()));
            let mut sink = ShareSink::new(&mut printer, tap);
            let out = realtime::run(live, rx, ctl_rx, stop_tx, &mut sink).await;
            drop((sink, ctl_tx));
            let mut summary = Summary::from_counters(&out.engine.snapshot_at(out.engine.now_ns().unwrap_or(0), &sources).counters);
            summary.snapshots = printer.snapshots();
            summary.recording = super::recording_summary(&out.recording);
            let mut json = summary.json();
            json["live"] = realtime::figures(&out, &latency);
            if let Some(share) = super::sharing::finish_async(publisher).await {
                json["share"] = share;
            }
            printer.finish_json(&json);
            (out, printer.take_error())
        } else {
            let (frames_tx, frames_rx) = watch::channel(None);
            let (done_tx, done_rx) = oneshot::channel();
            let task = tokio::spawn(async move {
                let mut ui = UiSink::new(frames_tx);
                let mut sink = ShareSink::new(&mut ui, tap);
                let out = realtime::run(live, rx, ctl_rx, stop_tx, &mut sink).await;
                let _ = done_tx.send(());
                out
            });
            let mut app = App::new(SessionInfo { mode: Mode::Live, config: config.clone() }, crate::ui::theme::Theme::from_env());
            app.units = settings.settings.units;
            app.share_probe = super::sharing::probe(&publisher);
            match crate::ui::run(app, frames_rx, ctl_tx, latency, done_rx).await {
                Ok(stats) => super::draw_stats(&stats, verbose),
                Err(e) => tracing::error!("screen: {e}"),
            }
            let out = task.await.expect("the pipeline task");
            // Issue 16, item 5: waiting for the publisher to drain (up to
            // its bound) holds no worker of this runtime.
            super::sharing::finish_async(publisher).await;
            (out, None)
        }
    });
    crate::say!(
        "termvel: live session ended ({}): {} events, {:.2} s of processor time",
        outcome.reason,
        outcome.events,
        realtime::cpu_seconds()
    );
    let complete = report_recording(&outcome.recording);
    if let Some(e) = out_error {
        return super::failed(super::stdout_error(&e));
    }
    Ok(super::code(complete))
}

/// Whether `--can IFACE` can work on this machine, said before the session
/// starts: a kernel without CAN support, or an interface that exists but is
/// not a CAN interface, would otherwise be retried for ever as "down". A
/// missing interface is not refused: a USB adapter may be plugged in later,
/// and the session waits for it.
fn can_interface_usable(iface: &str) -> Result<(), String> {
    // SAFETY: plain socket calls on a descriptor this function owns and closes.
    let fd = unsafe { libc::socket(libc::PF_CAN, libc::SOCK_RAW, libc::CAN_RAW) };
    if fd < 0 {
        let e = std::io::Error::last_os_error();
        return Err(if e.raw_os_error() == Some(libc::EAFNOSUPPORT) {
            format!(
                "this kernel has no CAN support (a CAN socket cannot be opened: {e}); load the can_raw module (modprobe can_raw) or use a kernel built with SocketCAN"
            )
        } else {
            format!("a CAN socket cannot be opened: {e}")
        });
    }
    unsafe { libc::close(fd) };
    // ARPHRD_CAN, the link type of every SocketCAN interface (linux/if_arp.h).
    const ARPHRD_CAN: u32 = 280;
    let type_file = std::path::Path::new("/sys/class/net").join(iface).join("type");
    match std::fs::read_to_string(&type_file).ok().and_then(|t| t.trim().parse::<u32>().ok()) {
        Some(t) if t != ARPHRD_CAN => Err(format!(
            "{iface} is not a CAN interface (its link type is {t}, a CAN interface's is {ARPHRD_CAN}); give one such as can0 or vcan0"
        )),
        _ => Ok(()),
    }
}
