//! Signal maps from arbitrary config text, then frames through them. The
//! input is a TOML text, a NUL byte, then bytes that make frames. A text
//! that validates as a `kind = "signals"` file is compiled
//! (`CanMap::compile`) and every frame decoded. Checks: no panic in
//! validation, compilation or decoding, for any layout the validator lets
//! through (big- and little-endian, signed, up to 64 bits, unaligned,
//! FD payloads up to 64 bytes); samples bit-identical to a reference decoder
//! written from the bit-numbering definition; `encode_signal` stays inside
//! the frame.

#![no_main]

mod common;

use libfuzzer_sys::fuzz_target;
use termvel::channel::ChannelTable;
use termvel::config::{Parsed, validate_text};
use termvel::decode::can::{CanMap, encode_signal, raw_for};

fuzz_target!(|data: &[u8]| {
    let split = data.iter().position(|&b| b == 0).unwrap_or(data.len());
    let Ok(text) = std::str::from_utf8(&data[..split]) else { return };
    let frames = data.get(split + 1..).unwrap_or(&[]);
    let report = validate_text("fuzz.toml", text);
    let Some(Parsed::Signals(signals)) = report.parsed else { return };
    assert!(report.errors.is_empty());

    let mut channels = ChannelTable::default();
    let mut map = CanMap::compile(&signals, &mut channels);
    let ids: Vec<_> = signals.messages.iter().map(|m| m.id).collect();

    // Every signal encodes inside its message's declared length.
    let mut cur = common::Cursor::new(frames);
    for m in &signals.messages {
        for s in &m.signals {
            let mut payload = vec![0u8; m.length as usize];
            let phys = f64::from(cur.u32() as i32) * s.scale + s.offset;
            let _ = raw_for(s, phys);
            encode_signal(s, phys, &mut payload);
        }
    }

    let mut out = Vec::new();
    let mut t_ns = 0i64;
    while !cur.is_empty() {
        let frame = cur.frame(&ids);
        t_ns += 1;
        out.clear();
        map.decode(t_ns, &frame, &mut out);
        common::check_samples(&signals, &frame, t_ns, &out, |name| {
            channels.find(name).expect("every signal's channel is interned")
        });
    }
});
