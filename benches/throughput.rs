//! Throughput and latency benchmarks (divan): `cargo bench --bench throughput`.
//!
//! - `candump_parse_decode`: candump lines parsed and their signals decoded,
//!   frames/s on one core (target: 10 million/s).
//! - `candump_parse`: the parser alone.
//! - `recording_read`: termvel's recording format read into events.
//! - `engine_feed`: decoded events through the engine, snapshots included.
//! - `pipeline_replay`: read + decode + engine, the whole replay path
//!   (target: 2 million frames/s).
//! - `projection`: one projected run to the braking point (target ≤ 100 µs).
//! - `planner_one_run`, `planner_monte_carlo`: the planner (target: 10 000
//!   trials in a few seconds).
//! - `derived_tick`: everything the engine computes at a snapshot tick
//!   (three projections, boost time, alerts' inputs).
//!
//! The data is the bundled demo (its CAN lines repeated for the candump
//! benchmarks), so the figures are for a realistic signal map.

use std::sync::{Arc, LazyLock};

use divan::Bencher;
use divan::counter::ItemsCount;
use termvel::config::ConfigSet;
use termvel::decode::{CanMap, candump};
use termvel::engine::projection::{BoostModel, ProjectionInputs, project};
use termvel::engine::{Engine, EngineOptions};
use termvel::event::Event;
use termvel::record::RecordingReader;

fn main() {
    divan::main();
}

struct Data {
    /// The demo's events with filler frames added to saturate a 1 Mbit/s
    /// bus (about 7 400 8-byte frames a second): half copies of mapped
    /// frames, half ids the map does not know, as on a real car's bus.
    saturated: Vec<Event>,
    recording: Vec<u8>,
    candump: Vec<u8>,
    candump_lines: u64,
    events: Vec<Event>,
    sources: termvel::event::SourceTable,
    config: Arc<ConfigSet>,
}

static DATA: LazyLock<Data> = LazyLock::new(|| {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replays/demo.tvrec");
    let recording = std::fs::read(&path).expect("demo recording");
    let text = String::from_utf8_lossy(&recording);
    let can: Vec<&str> = text.lines().filter(|l| l.starts_with('(')).collect();
    let mut candump = Vec::new();
    let mut candump_lines = 0;
    while candump_lines < 1_000_000 {
        for l in &can {
            candump.extend_from_slice(l.as_bytes());
            candump.push(b'\n');
            candump_lines += 1;
        }
    }
    let mut r = RecordingReader::new(&recording[..], "demo").unwrap();
    let mut events = Vec::new();
    while let Some(e) = r.next_event() {
        events.push(e);
    }
    let texts = r.header.configs.iter().map(|c| (c.origin.clone(), c.text.clone())).collect();
    let config = Arc::new(ConfigSet::from_texts(texts).unwrap());
    let sources = r.header.sources.clone();
    drop(r);
    let saturated = saturate(&events);
    Data { saturated, recording, candump, candump_lines, events, sources, config }
});

fn saturate(events: &[Event]) -> Vec<Event> {
    use termvel::event::{CanFrame, CanId, DataFrame, Payload};
    let mut out = Vec::with_capacity(events.len() * 20);
    let step_ns = 135_000; // one worst-case 8-byte frame at 1 Mbit/s
    let mut filler = 0u64;
    for w in events.windows(2) {
        out.push(w[0].clone());
        let mut t = w[0].t_ns + step_ns;
        while t < w[1].t_ns {
            filler += 1;
            let frame = if filler.is_multiple_of(2) {
                match &w[0].payload {
                    Payload::Can(f) => *f,
                    _ => CanFrame::Data(DataFrame::new(CanId::Standard(0x0C4), &[0; 8]).unwrap()),
                }
            } else {
                CanFrame::Data(DataFrame::new(CanId::Standard(0x600 + (filler % 64) as u16), &[0x55; 8]).unwrap())
            };
            out.push(Event::new(t, w[0].source.max(termvel::event::SourceId(2)), Payload::Can(frame)));
            t += step_ns;
        }
    }
    out
}

#[divan::bench]
fn pipeline_saturated_bus(bencher: Bencher) {
    let d = &*DATA;
    bencher.counter(ItemsCount::new(d.saturated.len())).bench_local(|| {
        let mut e = Engine::new(d.config.clone(), EngineOptions::default());
        let mut snaps = 0;
        for ev in &d.saturated {
            e.feed(ev, &d.sources, &mut |_| snaps += 1);
        }
        snaps
    });
}

#[divan::bench]
fn engine_feed_without_ticks(bencher: Bencher) {
    // Per-event cost alone: a snapshot interval longer than the stream.
    let d = &*DATA;
    bencher.counter(ItemsCount::new(d.events.len())).bench_local(|| {
        let mut e = Engine::new(d.config.clone(), EngineOptions { snapshot_every_ns: 3_600_000_000_000 });
        let mut snaps = 0;
        for ev in &d.events {
            e.feed(ev, &d.sources, &mut |_| snaps += 1);
        }
        snaps
    });
}

#[divan::bench]
fn candump_parse_decode(bencher: Bencher) {
    let d = &*DATA;
    let mut channels = termvel::channel::ChannelTable::default();
    let mut map = CanMap::compile(&d.config.signals, &mut channels);
    let mut samples = Vec::with_capacity(16);
    bencher.counter(ItemsCount::new(d.candump_lines)).bench_local(|| {
        let mut n = 0usize;
        let mut start = 0;
        for end in memchr::memchr_iter(b'\n', &d.candump) {
            let (t_ns, _iface, frame) = candump::parse_line_bytes(&d.candump[start..end]).expect("valid");
            samples.clear();
            map.decode(t_ns, &frame, &mut samples);
            n += samples.len();
            start = end + 1;
        }
        n
    });
}

#[divan::bench]
fn candump_parse(bencher: Bencher) {
    let d = &*DATA;
    bencher.counter(ItemsCount::new(d.candump_lines)).bench_local(|| {
        let mut start = 0;
        let mut acc = 0i64;
        for end in memchr::memchr_iter(b'\n', &d.candump) {
            acc = acc.wrapping_add(candump::parse_line_bytes(&d.candump[start..end]).expect("valid").0);
            start = end + 1;
        }
        acc
    });
}

#[divan::bench]
fn recording_read(bencher: Bencher) {
    let d = &*DATA;
    bencher.counter(ItemsCount::new(d.events.len())).bench_local(|| {
        let mut r = RecordingReader::new(&d.recording[..], "demo").unwrap();
        let mut n = 0;
        while r.next_event().is_some() {
            n += 1;
        }
        n
    });
}

#[divan::bench]
fn engine_feed(bencher: Bencher) {
    let d = &*DATA;
    bencher.counter(ItemsCount::new(d.events.len())).bench_local(|| {
        let mut e = Engine::new(d.config.clone(), EngineOptions::default());
        let mut snaps = 0;
        for ev in &d.events {
            e.feed(ev, &d.sources, &mut |_| snaps += 1);
        }
        snaps
    });
}

#[divan::bench]
fn pipeline_replay(bencher: Bencher) {
    let d = &*DATA;
    bencher.counter(ItemsCount::new(d.events.len())).bench_local(|| {
        let mut r = RecordingReader::new(&d.recording[..], "demo").unwrap();
        let mut e = Engine::new(d.config.clone(), EngineOptions::default());
        let mut snaps = 0;
        while let Some(ev) = r.next_event() {
            e.feed(&ev, &r.header.sources, &mut |_| snaps += 1);
        }
        snaps
    });
}

#[divan::bench]
fn projection(bencher: Bencher) {
    let cfg = &DATA.config;
    let inp = ProjectionInputs {
        vehicle: &cfg.vehicle,
        track: &cfg.track,
        x0_m: 1200.0,
        v0_mps: 80.0,
        rho: 1.17,
        wind_mps: 1.4,
        cda_m2: 0.9,
        crr0: 0.0128,
        boost: BoostModel {
            available: true,
            deliverable_w: 220e3,
            tau_s: 17.0,
            floor: 0.4,
            time_in_boost_s: 3.0,
            rated_w: 245e3,
            energy_j: 11e6,
            soc_fade_per_s: 0.0,
        },
    };
    bencher.bench(|| project(divan::black_box(&inp)).peak_mps);
}

#[divan::bench]
fn derived_tick(bencher: Bencher) {
    // The engine at the middle of the demo's pull: one snapshot tick's work.
    let d = &*DATA;
    let mut e = Engine::new(d.config.clone(), EngineOptions::default());
    let mid = d.events.len() / 2;
    for ev in &d.events[..mid] {
        e.feed(ev, &d.sources, &mut |_| {});
    }
    let next = &d.events[mid..];
    bencher.bench_local(|| {
        // Feeding the events of one 100 ms interval triggers one tick.
        let mut e = e.clone();
        let mut n = 0;
        for ev in next.iter().take(450) {
            e.feed(ev, &d.sources, &mut |_| n += 1);
        }
        n
    });
}

#[divan::bench(args = [1000])]
fn planner_monte_carlo(bencher: Bencher, trials: usize) {
    // The demo plan's Monte Carlo on every core: 10 000 trials take ten times this.
    let (plan, cfg) = termvel::config::load_plan(None, &[]).unwrap();
    let threads = std::thread::available_parallelism().map_or(2, |n| n.get());
    bencher.counter(ItemsCount::new(trials)).bench(|| {
        termvel::planner::monte_carlo(
            &cfg,
            &plan,
            termvel::config::run_plan::BoostStart::AtDistance(3000.0),
            Some(5750.0),
            trials,
            1,
            threads,
        )
    });
}

#[divan::bench]
fn planner_one_run(bencher: Bencher) {
    let (plan, cfg) = termvel::config::load_plan(None, &[]).unwrap();
    let c = termvel::planner::Conditions::nominal(&cfg, &plan);
    bencher
        .bench(|| termvel::planner::run(&cfg.vehicle, &cfg.track, &c, plan.driver.boost_start, Some(5750.0)).peak_mps);
}
