//! Fan-out latency of a shared run: the demo replay's snapshots published
//! at 10 a second (a real run's rate) through a mosquitto this bench
//! starts on a free loopback port, to 1, 10 and 50 followers running in
//! this process; publish-to-follower latency over every snapshot every
//! follower received (p50, p99, max), and how many arrived.
//!
//! `cargo bench --bench share_fanout` (`TERMVEL_BENCH_SECS`, default 20 s
//! a case); `-- --quick` runs 2 s a case (to check that it runs).

#[path = "support/broker.rs"]
mod broker;
use broker::Broker;

use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use termvel::config::ConfigSet;
use termvel::engine::{Engine, EngineOptions, Snapshot};
use termvel::share::follower::{self, FollowSettings};
use termvel::share::publisher::{Publisher, ShareSettings};
use termvel::share::{BrokerUrl, ShareSink, TlsFiles, Topics};
use termvel::sources::{EventSource, FileSource};
use termvel::stream::{SnapshotSink, StreamStatus};

/// The demo replay's snapshots, made once.
fn demo_snapshots() -> Vec<Arc<Snapshot>> {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replays/demo.tvrec");
    let mut src = FileSource::open(&path).unwrap();
    let mut engine = Engine::new(Arc::new(ConfigSet::embedded()), EngineOptions::default());
    let mut out = Vec::new();
    while let Some(ev) = src.next_event() {
        engine.feed(&ev, src.sources(), &mut |s| out.push(Arc::new(s)));
    }
    out
}

struct Case {
    sent: usize,
    received: usize,
    p50_us: u64,
    p99_us: u64,
    max_us: u64,
}

fn case(port: u16, followers: usize, snaps: &[Arc<Snapshot>], secs: u64) -> Case {
    let url = BrokerUrl::parse(&format!("mqtt://127.0.0.1:{port}")).unwrap();
    let topics = Topics::new(&format!("fanout/{followers}")).unwrap();
    // The followers: one runtime of two threads, all of them on it.
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build().unwrap();
    let latencies = Arc::new(Mutex::new(Vec::new()));
    let (ready_tx, ready_rx) = std::sync::mpsc::channel();
    let (stop_tx, _) = tokio::sync::broadcast::channel::<()>(1);
    let mut tasks = Vec::new();
    for i in 0..followers {
        let settings = FollowSettings {
            url: url.clone(),
            topics: topics.clone(),
            credentials: None,
            tls: TlsFiles::default(),
            say_on_stderr: false,
            outgoing: None,
        };
        let (ready, mut stop, lat) = (ready_tx.clone(), stop_tx.subscribe(), latencies.clone());
        let _ = i;
        tasks.push(rt.spawn(async move {
            let report = follower::follow(
                settings,
                move || {
                    let _ = ready.send(());
                },
                |_| {},
                async move {
                    let _ = stop.recv().await;
                },
            )
            .await
            .expect("a follower");
            lat.lock().unwrap().extend(report.latency_us);
        }));
    }
    for _ in 0..followers {
        ready_rx.recv_timeout(Duration::from_secs(30)).expect("every follower subscribed");
    }
    let (tap, publisher) = Publisher::start(ShareSettings {
        url: url.clone(),
        topics: topics.clone(),
        credentials: None,
        tls: TlsFiles::default(),
        description: serde_json::json!({}),
        say_on_stderr: false,
        events: false,
        control: None,
    })
    .unwrap();
    std::thread::sleep(Duration::from_millis(500));
    let mut inner = |_: Arc<Snapshot>, _: &StreamStatus| {};
    let mut sink = ShareSink::new(&mut inner, Some(tap));
    let status = StreamStatus::default();
    let count = (secs * 10) as usize;
    let start = Instant::now();
    for (i, s) in snaps.iter().cycle().take(count).enumerate() {
        let due = start + Duration::from_millis(100 * i as u64);
        std::thread::sleep(due.saturating_duration_since(Instant::now()));
        sink.snapshot(s.clone(), &status);
    }
    drop(sink);
    publisher.finish();
    std::thread::sleep(Duration::from_millis(500));
    let _ = stop_tx.send(());
    rt.block_on(async {
        for t in tasks {
            let _ = t.await;
        }
    });
    let mut lat = std::mem::take(&mut *latencies.lock().unwrap());
    lat.sort_unstable();
    let q = |p: f64| lat.get(((lat.len() as f64 - 1.0) * p).round() as usize).copied().unwrap_or(0);
    Case { sent: count, received: lat.len(), p50_us: q(0.5), p99_us: q(0.99), max_us: lat.last().copied().unwrap_or(0) }
}

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let secs: u64 =
        if quick { 2 } else { std::env::var("TERMVEL_BENCH_SECS").ok().and_then(|s| s.parse().ok()).unwrap_or(20) };
    let snaps = demo_snapshots();
    let broker = Broker::start();
    println!("fan-out latency, 10 snapshots a second for {secs} s a case (mosquitto on 127.0.0.1:{})", broker.1);
    println!("{:>10} {:>10} {:>12} {:>9} {:>9} {:>9}", "followers", "sent", "received", "p50 ms", "p99 ms", "max ms");
    for followers in [1, 10, 50] {
        let c = case(broker.1, followers, &snaps, secs);
        println!(
            "{:>10} {:>10} {:>12} {:>9.2} {:>9.2} {:>9.2}",
            followers,
            c.sent,
            format!("{} ({:.1} %)", c.received, 100.0 * c.received as f64 / (c.sent * followers) as f64),
            c.p50_us as f64 / 1000.0,
            c.p99_us as f64 / 1000.0,
            c.max_us as f64 / 1000.0
        );
    }
}
