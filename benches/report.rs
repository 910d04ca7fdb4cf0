//! Report benchmark: `termvel report` of a one-hour recording of a
//! saturated 1 Mbit/s bus, about 30 million frames (the target: well under a
//! minute).
//!
//! `cargo bench --bench report`. The recording is made once and kept in
//! `target/bench-data/hour.tvrec` (about 1.5 GB): the bundled demo run's
//! frames over and over, shifted in time, filled up to 8 350 frames/s with
//! frames of ids the signal map does not decode (a saturated bus carries
//! more than the engineer's channels).

use std::io::Write;
use std::path::PathBuf;
use std::time::Instant;

use termvel::report::{Run, Summary};

const HOUR_S: i64 = 3600;
const FRAMES_PER_S: i64 = 8_350;

fn make(path: &std::path::Path) {
    let f = std::fs::File::create(path).unwrap();
    let n = termvel::sim::demo::write_saturated_recording(f, HOUR_S, FRAMES_PER_S).unwrap();
    eprintln!("made {} ({n} events)", path.display());
}

fn main() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/bench-data");
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("hour.tvrec");
    if !path.exists() {
        let t = Instant::now();
        make(&path);
        eprintln!("in {:.1} s", t.elapsed().as_secs_f64());
    }
    let size = std::fs::metadata(&path).unwrap().len();
    let t = Instant::now();
    let run = Run::read(&path, &[], &mut |_, _| {}).unwrap();
    let summary = Summary::of(&run);
    let text = termvel::report::text(&summary);
    let secs = t.elapsed().as_secs_f64();
    std::io::stdout().flush().unwrap();
    println!(
        "report of a one-hour saturated-bus recording: {} events ({:.2} GB), {:.1} s of stream, in {:.1} s: {:.1} M events/s",
        run.events,
        size as f64 / 1e9,
        summary.duration_s,
        secs,
        run.events as f64 / secs / 1e6
    );
    assert!(text.contains("data quality"));
}
