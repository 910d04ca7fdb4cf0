//! How costs grow with the size of the input (divan): `cargo bench --bench
//! scaling`. Each benchmark runs at several sizes; a cost that grows in
//! proportion to the input shows the same time per item at every size, so
//! the figures to compare are the per-item ones.
//!
//! - `check_signal_map`: `check`'s validation of a signal map of N messages
//!   (four signals each, every channel new): TOML parsing, the uniqueness
//!   checks of ids, names and fed channels.
//! - `candump_many_interfaces`: a candump log that names N interfaces, one
//!   line each, read into events (each name interned in the source table).
//! - `line_telemetry_many_keys`: N line-telemetry lines, each with a key
//!   never seen before, decoded (each key interned in the channel table).
//!
//! Issue 13, item 14: each of these grew with the square of N.

use divan::Bencher;
use divan::counter::ItemsCount;
use termvel::config::{ConfigSet, validate_text};
use termvel::decode::{Decoder, lines};
use termvel::event::{Event, Payload, SourceId, SourceKind};
use termvel::record::RecordingReader;

fn main() {
    divan::main();
}

/// A signal map of `n` messages, four 16-bit signals each, every channel new.
fn signal_map(n: usize) -> String {
    let mut s = String::from("kind = \"signals\"\nbitrate = 1000000\ndata_bitrate = 2000000\n");
    for i in 0..n {
        s.push_str(&format!(
            "[[message]]\nid = 0x{:X}\nframe = \"extended\"\nname = \"m{i}\"\nperiod_ms = 60000\nlength = 8\n",
            0x10_0000 + i
        ));
        for k in 0..4 {
            s.push_str(&format!(
                "[[message.signal]]\nname = \"s{k}\"\nchannel = \"c{i}.s{k}\"\nstart_bit = {}\nbit_length = 16\n\
                 byte_order = \"little\"\nscale = 0.1\nunit = \"V\"\n",
                16 * k
            ));
        }
    }
    s
}

#[divan::bench(args = [2_000, 4_000, 8_000], sample_count = 5)]
fn check_signal_map(bencher: Bencher, n: usize) {
    let text = signal_map(n);
    bencher.counter(ItemsCount::new(n)).bench(|| {
        let r = validate_text("map.toml", divan::black_box(&text));
        assert!(r.errors.is_empty(), "{:?}", r.errors.first());
        r
    });
}

#[divan::bench(args = [5_000, 10_000, 40_000], sample_count = 5)]
fn candump_many_interfaces(bencher: Bencher, n: usize) {
    let mut log = String::new();
    for i in 0..n {
        log.push_str(&format!("(1773474133.{:06}) c{i} 0C4#0102030405060708\n", i % 1_000_000));
    }
    bencher.counter(ItemsCount::new(n)).bench(|| {
        let mut r = RecordingReader::new(divan::black_box(log.as_bytes()), "many.log").unwrap();
        let mut events = 0u64;
        while r.next_event().is_some() {
            events += 1;
        }
        assert_eq!(events, n as u64);
        r.header.sources.len()
    });
}

#[divan::bench(args = [5_000, 10_000, 40_000], sample_count = 5)]
fn line_telemetry_many_keys(bencher: Bencher, n: usize) {
    let events: Vec<Event> = (0..n)
        .map(|i| {
            let body = format!("k{i}.value=1.5");
            let line = format!("{body} #{:02X}", lines::crc8(body.as_bytes()));
            Event::new(i as i64, SourceId(2), Payload::Line(line.into_bytes()))
        })
        .collect();
    let signals = ConfigSet::embedded().signals;
    bencher.counter(ItemsCount::new(n)).with_inputs(|| Decoder::new(&signals)).bench_local_values(|mut d| {
        let mut out = Vec::new();
        for e in &events {
            d.decode(e, SourceKind::Lines, &mut out);
        }
        assert_eq!(out.len(), n);
        d
    });
}
