//! Determinism: the engine is a pure function of the event stream, so the
//! same recording gives byte-identical snapshots however it is played.

use std::sync::Arc;

use termvel::config::ConfigSet;
use termvel::engine::{Engine, EngineOptions, Snapshot};
use termvel::event::{Event, SourceTable};
use termvel::headless::snapshot_json;
use termvel::record::ReadStats;
use termvel::sources::FileSource;
use termvel::sources::{EventSource, RewindError, SourcePosition};
use termvel::stream::paced::{ChartHistory, PlayerOptions, SharedHistory, play};
use termvel::stream::{Control, Playback, StreamStatus};

use crate::util::{demo, snapshots_of, stdout, termvel};

fn demo_config() -> Arc<ConfigSet> {
    let src = FileSource::open(&demo()).unwrap();
    let texts = src.header().configs.iter().map(|c| (c.origin.clone(), c.text.clone())).collect();
    Arc::new(ConfigSet::from_texts(texts).unwrap())
}

/// Plays the demo through the player at `speed` on tokio's paused clock
/// (so pacing costs no real time) with the given controls sent first;
/// returns the snapshot lines.
fn played(speed: f64, controls: Vec<Control>) -> Vec<String> {
    let cfg = demo_config();
    let rt = tokio::runtime::Builder::new_current_thread().enable_time().start_paused(true).build().unwrap();
    let (tx, rx) = tokio::sync::mpsc::channel(16);
    for c in controls {
        tx.try_send(c).unwrap();
    }
    drop(tx);
    let mut out = Vec::new();
    let mut sink = |s: Arc<Snapshot>, _: &StreamStatus| out.push(snapshot_json(&s).to_string());
    let make = move || Engine::new(cfg.clone(), EngineOptions::default());
    let opts = PlayerOptions { speed, ..PlayerOptions::as_fast_as_possible() };
    rt.block_on(play(FileSource::open(&demo()).unwrap(), make, opts, rx, &mut sink)).unwrap();
    out
}

#[test]
fn the_same_recording_twice_gives_identical_snapshots() {
    let a = snapshots_of(FileSource::open(&demo()).unwrap(), demo_config());
    let b = snapshots_of(FileSource::open(&demo()).unwrap(), demo_config());
    assert!(a.len() > 900, "{} snapshots", a.len());
    assert!(a == b, "two runs differ");
    // The derived block is there and not trivially empty.
    assert!(a[600].contains("\"projection\":{"), "{}", &a[600][..200]);
}

#[test]
fn paced_and_as_fast_as_possible_give_identical_snapshots() {
    let fast = played(f64::INFINITY, vec![]);
    let paced = played(64.0, vec![]);
    let slow = played(0.5, vec![]);
    let straight = snapshots_of(FileSource::open(&demo()).unwrap(), demo_config());
    assert_eq!(fast.len(), straight.len());
    assert!(fast == straight, "the player changes nothing");
    assert!(paced == fast, "x64 differs from as fast as possible");
    assert!(slow == fast, "x0.5 differs from as fast as possible");
}

#[test]
fn seeking_back_lands_on_exactly_the_straight_run() {
    // Seek forward to 60 s in, then back to 20 s in: from there on the
    // snapshots must be those of a straight run (the engine restarts and
    // feeds forward; nothing of the later state leaks back).
    let straight = snapshots_of(FileSource::open(&demo()).unwrap(), demo_config());
    let t0_ns = serde_json::from_str::<serde_json::Value>(&straight[0]).unwrap()["t_ns"].as_i64().unwrap();
    let seeked = played(
        f64::INFINITY,
        vec![
            Control::Playback(Playback::SeekTo(t0_ns + 60_000_000_000)),
            Control::Playback(Playback::SeekTo(t0_ns + 20_000_000_000)),
        ],
    );
    // seeked = [where the forward seek landed, where the backward seek
    // landed, then everything played from there to the end].
    assert!(seeked.len() > 3);
    let target = t0_ns + 20_000_000_000;
    let landed = &seeked[1];
    let t_landed = serde_json::from_str::<serde_json::Value>(landed).unwrap()["t_ns"].as_i64().unwrap();
    // The last snapshot whose interval is complete at the target.
    assert!(t_landed <= target && t_landed >= target - 100_000_000, "landed at {t_landed}, target {target}");
    let j = straight.iter().position(|s| s == landed).expect("the landing snapshot is the straight run's");
    assert_eq!(&seeked[1..], &straight[j..]);
}

#[test]
fn the_binary_prints_the_same_bytes_paced_or_not() {
    let file = demo();
    let f = file.to_str().unwrap();
    let a = termvel(&["replay", f, "--headless", "--no-record"]);
    let b = termvel(&["replay", f, "--headless", "--no-record"]);
    assert!(a.status.success() && b.status.success());
    assert!(a.stdout == b.stdout, "two runs of the binary differ");
    // The demo is about 110 s of stream: at x64 this takes under 2 s.
    let paced = termvel(&["replay", f, "--headless", "--no-record", "--speed", "64"]);
    assert!(paced.status.success());
    assert!(paced.stdout == a.stdout, "x64 through the binary differs");
    let last = stdout(&a).lines().last().unwrap().to_string();
    assert!(last.starts_with("{\"summary\":"), "{last}");
}

/// The demo file, counting the times it had to start again from its
/// first event (a seek that found no checkpoint).
struct CountingSource {
    inner: FileSource,
    rewinds: Arc<std::sync::atomic::AtomicU32>,
}

impl EventSource for CountingSource {
    fn next_event(&mut self) -> Option<Event> {
        self.inner.next_event()
    }
    fn sources(&self) -> &SourceTable {
        self.inner.sources()
    }
    fn rewind(&mut self) -> Result<(), RewindError> {
        self.rewinds.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        self.inner.rewind()
    }
    fn read_stats(&self) -> ReadStats {
        self.inner.read_stats()
    }
    fn position(&self) -> Option<SourcePosition> {
        self.inner.position()
    }
    fn resume(&mut self, pos: &SourcePosition) -> Result<(), RewindError> {
        self.inner.resume(pos)
    }
}

/// What a sink saw of one snapshot: its JSON line, the stream's count of
/// snapshots, and the speed trace up to it as the screens would take it.
type Seen = (String, u64, Vec<(f64, f64)>);

/// Plays the demo as fast as possible with `controls` queued first: what
/// the sink saw of the first `traced` snapshots (of the rest, the trace is
/// left empty), the chart history at the end, and the rewinds.
fn played_with_history(controls: Vec<Control>, traced: usize) -> (Vec<Seen>, ChartHistory, u32) {
    let cfg = demo_config();
    let rt = tokio::runtime::Builder::new_current_thread().enable_time().start_paused(true).build().unwrap();
    let (tx, rx) = tokio::sync::mpsc::channel(16);
    for c in controls {
        tx.try_send(c).unwrap();
    }
    drop(tx);
    let history = SharedHistory::default();
    let mut out = Vec::new();
    let h = history.clone();
    let mut sink = |s: Arc<Snapshot>, st: &StreamStatus| {
        let trace = if out.len() < traced { h.lock().unwrap().trace_until(s.t_ns).collect() } else { Vec::new() };
        out.push((snapshot_json(&s).to_string(), st.snapshots, trace))
    };
    let make = move || Engine::new(cfg.clone(), EngineOptions::default());
    let opts = PlayerOptions { history: Some(history.clone()), ..PlayerOptions::as_fast_as_possible() };
    let rewinds = Arc::new(std::sync::atomic::AtomicU32::new(0));
    let src = CountingSource { inner: FileSource::open(&demo()).unwrap(), rewinds: rewinds.clone() };
    rt.block_on(play(src, make, opts, rx, &mut sink)).unwrap();
    let h = history.lock().unwrap().clone();
    (out, h, rewinds.load(std::sync::atomic::Ordering::Relaxed))
}

// Issue 15, items 1, 11 and 23: seeking back re-read the file from its
// start, the trace after a seek was drawn from the few frames the screen
// saw (the skipped stretch a straight line), and the snapshot counter kept
// counting across seeks. Now seeks go back to checkpoints, and wherever a
// seek lands the snapshot, the count of snapshots and the chart history are
// those of a straight run to the same place.
#[test]
fn seeks_through_checkpoints_land_on_the_straight_run_with_its_trace_and_counts() {
    let (straight, straight_history, _) = played_with_history(vec![], 0);
    let t_of = |l: &str| serde_json::from_str::<serde_json::Value>(l).unwrap()["t_ns"].as_i64().unwrap();
    let t0 = t_of(&straight[0].0);
    let s = 1_000_000_000;
    // Back, forward past checkpoints taken before the seek back, back to
    // the same checkpoint twice, forward a little, back before the first.
    let targets = [60 * s, 20 * s, 95 * s, 45 * s + 50_000_000, 31 * s, 31 * s + 200_000_000, 52 * s, 5 * s];
    let (seeked, history, rewinds) = played_with_history(
        targets.iter().map(|t| Control::Playback(Playback::SeekTo(t0 + t))).collect(),
        targets.len(),
    );
    assert_eq!(rewinds, 0, "every seek back found a checkpoint (one after the first event, then one each 10 s)");
    // seeked = [one landing per seek, then everything played from the last].
    for (k, target) in targets.iter().enumerate() {
        let (landed, count, trace) = &seeked[k];
        let j =
            straight.iter().position(|x| x.0 == *landed).unwrap_or_else(|| panic!("seek {k}: not a straight snapshot"));
        let t = t_of(landed);
        assert!(t <= t0 + target && t >= t0 + target - 100_000_000, "seek {k} landed at {t}");
        assert_eq!(*count, straight[j].1, "seek {k}: the count of snapshots is a straight run's");
        assert_eq!(*count, j as u64 + 1);
        let straight_trace: Vec<_> = straight_history.trace_until(t).collect();
        assert!(*trace == straight_trace, "seek {k}: the trace up to the landing is the straight run's");
    }
    let last = &seeked[targets.len() - 1].0;
    let j = straight.iter().position(|x| x.0 == *last).unwrap();
    let lines = |v: &[Seen]| v.iter().map(|x| (x.0.clone(), x.1)).collect::<Vec<_>>();
    assert!(lines(&seeked[targets.len() - 1..]) == lines(&straight[j..]), "from the last landing on, the straight run");
    assert!(history == straight_history, "the history is the straight run's");
    assert!(straight_history.trace.len() > 100, "{} trace points", straight_history.trace.len());
}

#[test]
fn the_order_of_signals_in_the_map_changes_no_snapshot() {
    // Issue 14, item 1: a frame's signals are one set; the pack fit read
    // the voltage with the previous frame's current because the map lists
    // the voltage first. Permuting the signals of every message of the demo
    // map (three seeded shuffles) must leave every snapshot byte-identical.
    let base = demo_config();
    let straight = snapshots_of(FileSource::open(&demo()).unwrap(), base.clone());
    for seed in [1u64, 2, 3] {
        let mut rng = termvel::sim::rng::Rng::new(seed);
        let mut cfg = (*base).clone();
        for m in &mut cfg.signals.messages {
            // Fisher–Yates with the simulator's seeded generator.
            for i in (1..m.signals.len()).rev() {
                let j = ((rng.uniform() * (i + 1) as f64) as usize).min(i);
                m.signals.swap(i, j);
            }
        }
        let permuted = snapshots_of(FileSource::open(&demo()).unwrap(), Arc::new(cfg));
        assert_eq!(permuted.len(), straight.len(), "seed {seed}");
        if let Some(k) = (0..straight.len()).find(|&k| permuted[k] != straight[k]) {
            panic!("seed {seed}: snapshot {k} differs:\n{}\n{}", straight[k], permuted[k]);
        }
    }
}
