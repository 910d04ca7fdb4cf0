//! Seek benchmark: how long a seek takes in a one-hour recording of a
//! saturated 1 Mbit/s bus (about 30 million frames), once the player has
//! been through it and holds its checkpoints (the target: at most 0.2 s
//! anywhere, back or forward).
//!
//! `cargo bench --bench seek`. The recording is the one `benches/report.rs`
//! makes, kept in `target/bench-data/hour.tvrec` (made here if missing).
//! `TERMVEL_SEEK_BENCH_S=300` uses a shorter recording of that many seconds
//! (`target/bench-data/seek-300s.tvrec`) where making the hour is too slow.
//!
//! It plays the file through the player as fast as possible with a list of
//! seeks queued: the first goes to the end (one pass through the file, which
//! lays down the checkpoints; timed apart), then seeks back and forth. The
//! player shows exactly one snapshot where each seek lands, so the time
//! between two landings is the time of one seek.

use std::path::PathBuf;
use std::sync::Arc;
use std::time::Instant;

use termvel::engine::{Engine, EngineOptions, Snapshot};
use termvel::event::NS_PER_S;
use termvel::sources::{EventSource, FileSource};
use termvel::stream::paced::{PlayerOptions, play};
use termvel::stream::{Control, Playback, StreamStatus};

const FRAMES_PER_S: i64 = 8_350;

fn main() {
    let secs: i64 = std::env::var("TERMVEL_SEEK_BENCH_S").ok().and_then(|s| s.parse().ok()).unwrap_or(3600);
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/bench-data");
    std::fs::create_dir_all(&dir).unwrap();
    let path = if secs == 3600 { dir.join("hour.tvrec") } else { dir.join(format!("seek-{secs}s.tvrec")) };
    if !path.exists() {
        let t = Instant::now();
        let f = std::fs::File::create(&path).unwrap();
        let n = termvel::sim::demo::write_saturated_recording(f, secs, FRAMES_PER_S).unwrap();
        eprintln!("made {} ({n} events) in {:.1} s", path.display(), t.elapsed().as_secs_f64());
    }

    let mut src = FileSource::open(&path).unwrap();
    let cfg = Arc::new(src.header().config_set(&[], &path).unwrap().0);
    let t0 = src.next_event().unwrap().t_ns;
    src.rewind().unwrap();
    let at = |f: f64| t0 + (secs as f64 * f * NS_PER_S as f64) as i64;
    // The end first (the pass that lays down the checkpoints), then back
    // and forth across the whole recording, ending near the end so the
    // play-out after the last seek is short.
    let fractions = [0.999, 0.5, 0.83, 0.003, 0.71, 0.17, 0.98, 0.33, 0.9, 0.05, 0.62, 0.997];
    let (tx, rx) = tokio::sync::mpsc::channel(fractions.len());
    for f in fractions {
        tx.try_send(Control::Playback(Playback::SeekTo(at(f)))).unwrap();
    }
    drop(tx);
    let mut landings = Vec::new();
    let mut sink = |_: Arc<Snapshot>, _: &StreamStatus| {
        if landings.len() < fractions.len() {
            landings.push(Instant::now());
        }
    };
    let make = move || Engine::new(cfg.clone(), EngineOptions::default());
    let opts = PlayerOptions::as_fast_as_possible();
    let rt = tokio::runtime::Builder::new_current_thread().enable_time().build().unwrap();
    let start = Instant::now();
    let out = rt.block_on(play(src, make, opts, rx, &mut sink)).unwrap();
    let first_pass_s = (landings[0] - start).as_secs_f64();
    let seeks: Vec<f64> = landings.windows(2).map(|w| (w[1] - w[0]).as_secs_f64()).collect();
    let worst = seeks.iter().cloned().fold(0.0, f64::max);
    let mean = seeks.iter().sum::<f64>() / seeks.len() as f64;
    println!(
        "seek in a {secs} s saturated-bus recording ({} events): first pass {first_pass_s:.1} s; {} checkpoints; {} seeks: mean {:.0} ms, worst {:.0} ms",
        out.read_stats.events,
        out.checkpoints,
        seeks.len(),
        mean * 1e3,
        worst * 1e3
    );
}
