//! Processor time that sharing adds to the reading station: the live
//! pipeline (engine, a real recording on disk) fed a saturated 1 Mbit/s
//! bus (9 000 frames/s) for a while, without sharing, with `--share`, and
//! with `--share --share-events` (every event also sent in batches), to a
//! mosquitto this bench starts on a free loopback port. The frames are put
//! on the pipeline's input channel by a thread of this process, whose own
//! processor time is taken out; mosquitto's is its own process's.
//!
//! `cargo bench --bench share_cost` (`TERMVEL_BENCH_SECS`, default 20 s a
//! case); `-- --quick` runs 1 s a case (to check that it runs).

#[path = "support/broker.rs"]
mod broker;
use broker::Broker;

use std::sync::Arc;
use std::time::{Duration, Instant};

use termvel::config::ConfigSet;
use termvel::engine::{Engine, EngineOptions, Snapshot};
use termvel::event::{CanFrame, CanId, DataFrame, Event, Payload, SourceKind, SourceTable};
use termvel::share::publisher::{Publisher, ShareSettings};
use termvel::share::{BrokerUrl, ShareSink, TlsFiles, Topics};
use termvel::sources::link::{INPUT_CAPACITY, SessionClock};
use termvel::stream::StreamStatus;
use termvel::stream::realtime::{LiveOptions, cpu_seconds, run};
use tokio::sync::{mpsc, watch};

fn thread_cpu_s() -> f64 {
    // SAFETY: getrusage fills the struct it is given.
    let mut ru: libc::rusage = unsafe { std::mem::zeroed() };
    unsafe { libc::getrusage(libc::RUSAGE_THREAD, &mut ru) };
    let tv = |t: libc::timeval| t.tv_sec as f64 + t.tv_usec as f64 * 1e-6;
    tv(ru.ru_utime) + tv(ru.ru_stime)
}

#[derive(Clone, Copy, PartialEq)]
enum Sharing {
    Off,
    Snapshots,
    SnapshotsAndEvents,
}

struct Case {
    events: u64,
    cpu_s: f64,
    seconds: f64,
    published: u64,
    batches: u64,
    not_shared: u64,
}

fn case(sharing: Sharing, port: u16, rate: u64, secs: u64) -> Case {
    let dir = tempfile::tempdir().unwrap();
    let config = Arc::new(ConfigSet::embedded());
    let mut sources = SourceTable::default();
    let src = sources.intern("can0", SourceKind::Can);
    let (recorder, _) = termvel::record::create_recording(dir.path(), "bench", &config, &sources).unwrap();
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build().unwrap();
    let (ctl_tx, ctl_rx) = mpsc::channel(4);
    let share = (sharing != Sharing::Off).then(|| {
        Publisher::start(ShareSettings {
            url: BrokerUrl::parse(&format!("mqtt://127.0.0.1:{port}")).unwrap(),
            topics: Topics::new("bench").unwrap(),
            credentials: None,
            tls: TlsFiles::default(),
            description: serde_json::json!({}),
            say_on_stderr: false,
            events: sharing == Sharing::SnapshotsAndEvents,
            control: None,
        })
        .unwrap()
    });
    let (tap, publisher) = match share {
        Some((t, p)) => (Some(t), Some(p)),
        None => (None, None),
    };
    // Let the publisher connect before the clock starts.
    std::thread::sleep(Duration::from_millis(300));
    let cpu_before = cpu_seconds();
    let clock = SessionClock::start();
    let (tx, rx) = mpsc::channel(INPUT_CAPACITY);
    let sender = std::thread::spawn(move || {
        let start = Instant::now();
        let end = start + Duration::from_secs(secs);
        let mut sent = 0u64;
        // The demo map's powertrain message, its bytes counting up.
        let id = CanId::Standard(0x0C4);
        while Instant::now() < end {
            let due = start.elapsed().as_nanos() as u64 * rate / 1_000_000_000;
            while sent < due {
                let frame = CanFrame::Data(DataFrame::new(id, &sent.to_le_bytes()).unwrap());
                if tx.blocking_send(Event::new(clock.now_ns(), src, Payload::Can(frame))).is_err() {
                    break;
                }
                sent += 1;
            }
            std::thread::sleep(Duration::from_micros(500));
        }
        thread_cpu_s()
    });
    let t0 = Instant::now();
    let out = rt.block_on(async {
        let (stop_tx, _stop_rx) = watch::channel(false);
        let live = LiveOptions {
            engine: Engine::new(config.clone(), EngineOptions { snapshot_every_ns: 100_000_000 }),
            sources: sources.clone(),
            clock,
            recorder: Some((recorder, dir.path().join("bench.tvrec"))),
            latency: None,
            duration: None,
        };
        let mut inner = |_: Arc<Snapshot>, _: &StreamStatus| {};
        let mut sink = ShareSink::new(&mut inner, tap);
        let out = run(live, rx, ctl_rx, stop_tx, &mut sink).await;
        drop(ctl_tx);
        out
    });
    let sender_cpu = sender.join().unwrap();
    let stats = publisher.map(Publisher::finish);
    let seconds = t0.elapsed().as_secs_f64();
    let cpu_s = cpu_seconds() - cpu_before - sender_cpu;
    let n = |f: fn(&termvel::share::ShareStats) -> &std::sync::atomic::AtomicU64| {
        stats.as_ref().map_or(0, |s| f(s).load(std::sync::atomic::Ordering::Relaxed))
    };
    Case {
        events: out.events,
        cpu_s,
        seconds,
        published: n(|s| &s.snapshots_published),
        batches: n(|s| &s.event_batches),
        not_shared: n(|s| &s.messages_not_shared),
    }
}

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let secs: u64 =
        if quick { 1 } else { std::env::var("TERMVEL_BENCH_SECS").ok().and_then(|s| s.parse().ok()).unwrap_or(20) };
    let broker = Broker::start();
    println!("processor time added by sharing, 9 000 frames/s, {secs} s a case (mosquitto on 127.0.0.1:{})", broker.1);
    println!(
        "{:>22} {:>10} {:>10} {:>11} {:>10} {:>10}",
        "case", "events", "CPU/core", "snapshots", "batches", "not shared"
    );
    for (name, sharing) in [
        ("no sharing", Sharing::Off),
        ("--share", Sharing::Snapshots),
        ("--share --share-events", Sharing::SnapshotsAndEvents),
    ] {
        let c = case(sharing, broker.1, 9_000, secs);
        println!(
            "{:>22} {:>10} {:>9.1}% {:>11} {:>10} {:>10}",
            name,
            c.events,
            100.0 * c.cpu_s / c.seconds,
            c.published,
            c.batches,
            c.not_shared
        );
    }
}
