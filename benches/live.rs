//! Live pipeline benchmark: arrival-to-applied latency (the histogram the
//! feed screen shows: p50, p99, max) and processor time, with a USB-CAN
//! adapter on a real pseudo-terminal feeding the live pipeline in this
//! process (the serial source, the engine, a real recording on disk), at a
//! saturated 1 Mbit/s bus (9 000 frames/s) and at ten times that.
//!
//! `cargo bench --bench live` (`TERMVEL_BENCH_SECS`, default 20 s a case).
//! The sender runs in a thread of this process; its own processor time is
//! measured and taken out of termvel's.

#[path = "../tests/suite/pty.rs"]
#[allow(dead_code)]
mod pty;
#[path = "../tests/suite/sequence.rs"]
#[allow(dead_code)]
mod sequence;

use std::sync::Arc;
use std::time::{Duration, Instant};

use termvel::config::ConfigSet;
use termvel::engine::{Engine, EngineOptions, Snapshot};
use termvel::event::{SourceKind, SourceTable};
use termvel::sources::link::{INPUT_CAPACITY, SessionClock};
use termvel::sources::serial_port::{Proto, SerialSpec};
use termvel::stream::StreamStatus;
use termvel::stream::realtime::{LiveOptions, run};
use tokio::sync::{mpsc, watch};

fn thread_cpu_s() -> f64 {
    // SAFETY: getrusage fills the struct it is given.
    let mut ru: libc::rusage = unsafe { std::mem::zeroed() };
    unsafe { libc::getrusage(libc::RUSAGE_THREAD, &mut ru) };
    let tv = |t: libc::timeval| t.tv_sec as f64 + t.tv_usec as f64 * 1e-6;
    tv(ru.ru_utime) + tv(ru.ru_stime)
}

struct Case {
    rate: u64,
    p50: u64,
    p99: u64,
    max: u64,
    events: u64,
    termvel_cpu: f64,
    seconds: f64,
    snapshots: u64,
}

fn case(rate: u64, secs: u64) -> Case {
    let mut adapter = pty::Pty::new();
    let path = adapter.path.clone();
    let dir = tempfile::tempdir().unwrap();
    let config = Arc::new(ConfigSet::embedded());
    let mut sources = SourceTable::default();
    let src = sources.intern("pt", SourceKind::Can);
    let (recorder, _) = termvel::record::create_recording(dir.path(), "bench", &config, &sources).unwrap();
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build().unwrap();
    let cpu_before = termvel::stream::realtime::cpu_seconds();
    let sender = std::thread::spawn(move || {
        assert_eq!(adapter.read_until(b"O\r", Duration::from_secs(10)), b"C\rS8\rO\r");
        let start = Instant::now();
        let end = start + Duration::from_secs(secs);
        let mut sent = 0u64;
        let mut buf = String::new();
        while Instant::now() < end {
            let due = start.elapsed().as_nanos() as u64 * rate / 1_000_000_000;
            buf.clear();
            while sent < due {
                sequence::push_slcan(&mut buf, 0x5F0, sent);
                sent += 1;
            }
            adapter.send(buf.as_bytes());
            std::thread::sleep(Duration::from_micros(500));
        }
        // Keep the device open until the session ends.
        std::thread::sleep(Duration::from_millis(1500));
        (sent, thread_cpu_s())
    });
    let latency = termvel::stream::latency_histogram();
    let mut snapshots = 0u64;
    let t0 = Instant::now();
    let out = rt.block_on(async {
        let clock = SessionClock::start();
        let (tx, rx) = mpsc::channel(INPUT_CAPACITY);
        let (stop_tx, stop_rx) = watch::channel(false);
        let spec = SerialSpec { path, baud: 115_200, proto: Proto::Slcan, can_bitrate: 1_000_000, name: None };
        tokio::spawn(termvel::sources::serial_port::run(spec, src, clock, tx, stop_rx));
        let live = LiveOptions {
            engine: Engine::new(config.clone(), EngineOptions { snapshot_every_ns: 100_000_000 }),
            sources: sources.clone(),
            clock,
            recorder: Some((recorder, dir.path().join("bench.tvrec"))),
            latency: Some(latency.clone()),
            duration: Some(Duration::from_secs(secs + 1)),
        };
        let (_ctl_tx, ctl_rx) = mpsc::channel(4);
        let mut sink = |_: Arc<Snapshot>, _: &StreamStatus| snapshots += 1;
        run(live, rx, ctl_rx, stop_tx, &mut sink).await
    });
    let seconds = t0.elapsed().as_secs_f64();
    let (_sent, sender_cpu) = sender.join().unwrap();
    let termvel_cpu = termvel::stream::realtime::cpu_seconds() - cpu_before - sender_cpu;
    let h = latency.lock().unwrap();
    Case {
        rate,
        p50: h.value_at_quantile(0.5),
        p99: h.value_at_quantile(0.99),
        max: h.max(),
        events: out.events,
        termvel_cpu,
        seconds,
        snapshots,
    }
}

fn main() {
    // `cargo bench` passes --bench; nothing else to parse.
    let secs: u64 = std::env::var("TERMVEL_BENCH_SECS").ok().and_then(|s| s.parse().ok()).unwrap_or(20);
    println!("live pipeline, slcan adapter on a pseudo-terminal, {secs} s a case");
    println!(
        "{:>12} {:>10} {:>9} {:>9} {:>9} {:>11} {:>10}",
        "frames/s", "events", "p50 µs", "p99 µs", "max µs", "CPU/core", "snapshots"
    );
    for rate in [9_000, 90_000] {
        let c = case(rate, secs);
        println!(
            "{:>12} {:>10} {:>9} {:>9} {:>9} {:>10.1}% {:>10}",
            c.rate,
            c.events,
            c.p50,
            c.p99,
            c.max,
            100.0 * c.termvel_cpu / c.seconds,
            c.snapshots
        );
    }
}
