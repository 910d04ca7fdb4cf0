//! Reads candump logs and decodes every frame through the demo signal map,
//! printing frames per second: the termvel side of
//! `scripts/throughput-vs-python-can.sh`.
//!
//! `cargo run --release --example parse-throughput -- FILE`
//!
//! Two figures: the raw path (the file read in chunks, then `candump::parse_line` and the
//! compiled map: what the engine's decoder costs) and the reader path
//! (`RecordingReader` streaming from disk, events built, as a replay does).

use std::time::Instant;

use termvel::channel::ChannelTable;
use termvel::config::ConfigSet;
use termvel::decode::{CanMap, candump};
use termvel::event::Payload;
use termvel::record::RecordingReader;

fn main() {
    let path = std::env::args().nth(1).expect("usage: parse-throughput FILE");
    let cfg = ConfigSet::embedded();
    let mut map = CanMap::compile(&cfg.signals, &mut ChannelTable::default());
    let mut samples = Vec::with_capacity(16);
    // The file is read too (python-can's figure includes it), in chunks
    // through one reused buffer, whole lines at a time.
    let t = Instant::now();
    let mut file = std::fs::File::open(&path).expect("open the log");
    let mut buf = vec![0u8; 1 << 20];
    let (mut frames, mut decoded, mut have) = (0u64, 0u64, 0usize);
    loop {
        let n = std::io::Read::read(&mut file, &mut buf[have..]).expect("read the log");
        have += n;
        let mut start = 0;
        for end in memchr::memchr_iter(b'\n', &buf[..have]) {
            if let Ok((t_ns, _iface, frame)) = candump::parse_line_bytes(&buf[start..end]) {
                samples.clear();
                map.decode(t_ns, &frame, &mut samples);
                decoded += samples.len() as u64;
                frames += 1;
            }
            start = end + 1;
        }
        buf.copy_within(start..have, 0);
        have -= start;
        if n == 0 {
            break;
        }
    }
    let raw = t.elapsed().as_secs_f64();

    let mut map = CanMap::compile(&cfg.signals, &mut ChannelTable::default());
    let t = Instant::now();
    let mut r = RecordingReader::open(std::path::Path::new(&path)).expect("open the log");
    let mut n = 0u64;
    while let Some(ev) = r.next_event() {
        if let Payload::Can(f) = &ev.payload {
            samples.clear();
            map.decode(ev.t_ns, f, &mut samples);
            n += 1;
        }
    }
    let reader = t.elapsed().as_secs_f64();
    println!(
        "termvel raw parse+decode: {frames} frames in {raw:.3} s = {:.0} frames/s ({decoded} samples)",
        frames as f64 / raw
    );
    println!("termvel reader parse+decode: {n} frames in {reader:.3} s = {:.0} frames/s", n as f64 / reader);
}
