//! CAN signal decoding through the compiled signal map of the embedded demo
//! configuration (`ConfigSet::embedded()`): arbitrary classic, FD, remote
//! and error frames, most of them with ids the map knows, any payload of
//! 0 to 64 bytes. Checks: no panic; every sample is what a reference
//! decoder written from the bit-numbering definition gives (same signals,
//! same channels, bit-identical values, same validity); the counters add up.

#![no_main]

mod common;

use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use termvel::config::{ConfigSet, Signals};
use termvel::decode::{CanMap, Sample};
use termvel::event::{CanFrame, CanId};

struct Fixture {
    signals: Signals,
    map: CanMap,
    channels: termvel::channel::ChannelTable,
    ids: Vec<CanId>,
}

fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let signals = ConfigSet::embedded().signals;
        let mut channels = termvel::channel::ChannelTable::default();
        let map = CanMap::compile(&signals, &mut channels);
        let ids = signals.messages.iter().map(|m| m.id).collect();
        Fixture { signals, map, channels, ids }
    })
}

fuzz_target!(|data: &[u8]| {
    let fx = fixture();
    let mut map = fx.map.clone();
    let mut cur = common::Cursor::new(data);
    let mut out: Vec<Sample> = Vec::new();
    let mut frames = 0u64;
    let mut t_ns = 0i64;
    while !cur.is_empty() {
        let frame = cur.frame(&fx.ids);
        t_ns += i64::from(cur.u8());
        out.clear();
        map.decode(t_ns, &frame, &mut out);
        common::check_samples(&fx.signals, &frame, t_ns, &out, |name| {
            fx.channels.find(name).expect("every signal's channel is interned")
        });
        if matches!(frame, CanFrame::Data(_) | CanFrame::Fd(_)) {
            frames += 1;
        }
        assert!(map.contains(frame.id().unwrap_or(CanId::Standard(0))) || out.is_empty());
    }
    let c = map.counters;
    assert_eq!(c.frames, frames);
    assert!(c.unmapped <= c.frames);
    let mapped: u64 = map.message_counts.iter().map(|m| m.frames).sum();
    assert_eq!(mapped + c.unmapped, c.frames);
});
