//! Report benchmark: `termvel report` of a one-hour recording of a
//! saturated 1 Mbit/s bus, about 30 million frames (the target: well under a
//! minute).
//!
//! `cargo bench --bench report`. The recording is made once and kept in
//! `target/bench-data/hour.tvrec` (about 1.3 GB): the bundled demo run's
//! frames over and over, shifted in time, filled up to 8 350 frames/s with
//! frames of ids the signal map does not decode (a saturated bus carries
//! more than the engineer's channels).

use std::io::Write;
use std::path::PathBuf;
use std::time::Instant;

use termvel::event::{CanFrame, CanId, DataFrame, Event, Payload, SourceKind};
use termvel::record::{RecordingReader, RecordingWriter};
use termvel::report::{Run, Summary};

const HOUR_S: i64 = 3600;
const FRAMES_PER_S: i64 = 8_350;

fn make(path: &std::path::Path) {
    let demo = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("replays/demo.tvrec");
    let mut r = RecordingReader::open(&demo).unwrap();
    let mut events = Vec::new();
    while let Some(ev) = r.next_event() {
        if !matches!(ev.payload, Payload::Note(_)) {
            events.push(ev);
        }
    }
    let header = r.header.clone();
    let mut sources = header.sources.clone();
    let can = sources.intern("can0", SourceKind::Can);
    let (t0, t1) = (events[0].t_ns, events.last().unwrap().t_ns);
    let lap = t1 - t0 + 1_000_000;
    let f = std::fs::File::create(path).unwrap();
    let mut w = RecordingWriter::new(std::io::BufWriter::with_capacity(1 << 22, f), &header).unwrap();
    let mut n = 0u64;
    let mut filler_t = t0;
    let filler_step = 1_000_000_000 / FRAMES_PER_S;
    let end = t0 + HOUR_S * 1_000_000_000;
    let mut shift = 0;
    'outer: loop {
        for ev in &events {
            let t = ev.t_ns + shift;
            if t >= end {
                break 'outer;
            }
            // Filler frames up to this event's time.
            while filler_t < t {
                let data = n.to_le_bytes();
                let f = CanFrame::Data(DataFrame::new(CanId::Standard(0x700 + (n % 16) as u16), &data).unwrap());
                w.write_event(&Event::new(filler_t, can, Payload::Can(f)), &sources).unwrap();
                filler_t += filler_step;
                n += 1;
            }
            let mut e = ev.clone();
            e.t_ns = t;
            w.write_event(&e, &sources).unwrap();
            n += 1;
        }
        shift += lap;
    }
    w.flush().unwrap();
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
