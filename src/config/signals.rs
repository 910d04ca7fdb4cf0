//! The signal map: which CAN messages carry which signals, and how.
//!
//! Bit numbering (common practice for CAN signal layouts): bit `n` of the
//! payload is bit `n % 8` of byte `n / 8`, bit 0 the least significant.
//! A `little` signal starts at its least significant bit and runs upward. A
//! `big` signal starts at its most significant bit and runs downward within
//! a byte, then on from bit 7 of the next byte.

use serde::Deserialize;
use toml::Spanned;

use super::Ctx;
use std::collections::{HashMap, HashSet};

use crate::channel::{CANONICAL, MAX_CHANNELS, MAX_MAGNITUDE, canonical_dimension, valid_channel_name};
use crate::event::{CanId, FdFrame};
use crate::units::{Unit, parse_unit, unit_names};

type F = Spanned<f64>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Raw {
    #[allow(dead_code)]
    kind: String,
    bitrate: Spanned<u32>,
    data_bitrate: Option<Spanned<u32>>,
    gnss: Option<RawPeriod>,
    lines: Option<RawPeriod>,
    #[serde(default)]
    message: Vec<RawMessage>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPeriod {
    period_ms: F,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMessage {
    id: Spanned<u32>,
    frame: Option<Spanned<String>>,
    name: Spanned<String>,
    period_ms: F,
    length: Spanned<u8>,
    #[serde(default)]
    fd: bool,
    #[serde(default)]
    signal: Vec<RawSignal>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSignal {
    name: Spanned<String>,
    channel: Spanned<String>,
    start_bit: Spanned<u16>,
    bit_length: Spanned<u8>,
    byte_order: Spanned<String>,
    #[serde(default)]
    signed: bool,
    scale: F,
    #[serde(default)]
    offset: Option<F>,
    unit: Spanned<String>,
    min: Option<F>,
    max: Option<F>,
}

/// Byte order of a signal's bits.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ByteOrder {
    Little,
    Big,
}

/// Most messages a signal map may hold: the decoder numbers them with 16
/// bits and keeps one value for "not in the map".
pub const MAX_MESSAGES: usize = u16::MAX as usize;

/// One signal, validated.
#[derive(Clone, Debug, PartialEq)]
pub struct Signal {
    pub name: String,
    pub channel: String,
    pub start_bit: u16,
    pub bit_length: u8,
    pub byte_order: ByteOrder,
    pub signed: bool,
    pub scale: f64,
    pub offset: f64,
    pub unit_name: String,
    pub unit: Unit,
    /// Valid range in the signal's own unit (after scale and offset).
    pub min: Option<f64>,
    pub max: Option<f64>,
}

/// One message, validated.
#[derive(Clone, Debug, PartialEq)]
pub struct Message {
    pub id: CanId,
    pub name: String,
    pub period_ns: i64,
    /// Payload length in bytes.
    pub length: u8,
    pub fd: bool,
    pub signals: Vec<Signal>,
}

/// The validated signal map.
#[derive(Clone, Debug, PartialEq)]
pub struct Signals {
    /// Nominal (arbitration) bit rate of the bus, bit/s.
    pub bitrate: u32,
    /// Data-phase bit rate for CAN FD frames with bit-rate switch, bit/s.
    pub data_bitrate: Option<u32>,
    /// Expected period of GNSS sentences, ns.
    pub gnss_period_ns: i64,
    /// Expected period of line-telemetry values, ns.
    pub lines_period_ns: i64,
    pub messages: Vec<Message>,
}

/// Payload bit positions (`byte·8 + bit`) a signal occupies, most
/// significant first for `big`, least significant first for `little`.
pub fn signal_bits(start_bit: u16, bit_length: u8, order: ByteOrder) -> Vec<u32> {
    let mut out = Vec::with_capacity(bit_length as usize);
    let mut p = start_bit as u32;
    for i in 0..bit_length as u32 {
        if i > 0 {
            p = match order {
                ByteOrder::Little => p + 1,
                ByteOrder::Big if p.is_multiple_of(8) => p + 15,
                ByteOrder::Big => p - 1,
            };
        }
        out.push(p);
    }
    out
}

pub(super) fn validate(ctx: &mut Ctx<'_>) -> Option<Signals> {
    let raw: Raw = ctx.parse()?;
    let bitrate = *raw.bitrate.get_ref();
    if !(10_000..=1_000_000).contains(&bitrate) {
        ctx.err(
            raw.bitrate.span(),
            "bitrate",
            format!("expected a CAN bit rate from 10000 to 1000000 bit/s, found {bitrate}"),
        );
    }
    let data_bitrate = raw.data_bitrate.as_ref().map(|d| {
        let v = *d.get_ref();
        if !(bitrate..=15_000_000).contains(&v) {
            ctx.err(
                d.span(),
                "data_bitrate",
                format!("expected a data bit rate from the nominal rate ({bitrate}) to 15000000 bit/s, found {v}"),
            );
        }
        v
    });
    let gnss_period_ns = raw.gnss.as_ref().map_or(100_000_000, |g| {
        (ctx.range(&g.period_ms, "gnss.period_ms", 1.0, 10_000.0, "a period in ms") * 1e6) as i64
    });
    let lines_period_ns = raw.lines.as_ref().map_or(100_000_000, |g| {
        (ctx.range(&g.period_ms, "lines.period_ms", 1.0, 10_000.0, "a period in ms") * 1e6) as i64
    });

    let mut messages = Vec::new();
    // Message names and ids seen so far, with the index of the message that
    // has each, for the uniqueness checks: maps, so a map of 40 000
    // messages is checked in linear time.
    let mut names: HashMap<String, usize> = HashMap::new();
    let mut ids: HashMap<CanId, usize> = HashMap::new();
    for (mi, m) in raw.message.iter().enumerate() {
        let mk = |k: &str| format!("message[{mi}].{k}");
        let extended = match m.frame.as_ref().map(|f| f.get_ref().as_str()) {
            None | Some("standard") => false,
            Some("extended") => true,
            Some(other) => {
                let f = m.frame.as_ref().expect("matched Some");
                ctx.err(f.span(), &mk("frame"), format!("expected \"standard\" or \"extended\", found \"{other}\""));
                false
            }
        };
        let raw_id = *m.id.get_ref();
        let id = if extended { CanId::extended(raw_id) } else { CanId::standard(raw_id) };
        let Some(id) = id else {
            let msg = if extended {
                format!("expected an extended id up to 0x1FFFFFFF, found 0x{raw_id:X}")
            } else if raw_id <= CanId::EXTENDED_MAX {
                format!(
                    "expected a standard id up to 0x7FF, found 0x{raw_id:X}; write frame = \"extended\" for a 29-bit id"
                )
            } else {
                format!("expected an id up to 0x7FF (standard) or 0x1FFFFFFF (extended), found 0x{raw_id:X}")
            };
            ctx.err(m.id.span(), &mk("id"), msg);
            continue;
        };
        if let Some(&j) = ids.get(&id) {
            ctx.err(m.id.span(), &mk("id"), format!("expected a unique id; 0x{:X} is already message[{j}]", id.raw()));
        }
        let period_ms = ctx.range(&m.period_ms, &mk("period_ms"), 0.1, 60_000.0, "a period in ms");
        let length = *m.length.get_ref();
        let len_ok = if m.fd { FdFrame::LENGTHS.contains(&(length as usize)) } else { length <= 8 };
        if !len_ok {
            let msg = if m.fd {
                format!("expected a CAN FD length (0-8, 12, 16, 20, 24, 32, 48 or 64 bytes), found {length}")
            } else if length <= 64 {
                format!("expected 0 to 8 bytes for a classic frame, found {length}; set fd = true for a CAN FD message")
            } else {
                format!("expected 0 to 8 bytes for a classic frame, found {length}")
            };
            ctx.err(m.length.span(), &mk("length"), msg);
            continue;
        }
        let name = m.name.get_ref().trim().to_string();
        if name.is_empty() {
            ctx.err(m.name.span(), &mk("name"), "expected a non-empty name");
        } else if let Some(&j) = names.get(&name) {
            // Names label the message on the screens and in `check`: two
            // messages with one name cannot be told apart.
            ctx.err(
                m.name.span(),
                &mk("name"),
                format!("expected a unique message name; \"{name}\" is already message[{j}]"),
            );
        }
        names.entry(name.clone()).or_insert(mi);
        if length == 0 && !m.signal.is_empty() {
            ctx.err(
                m.length.span(),
                &mk("length"),
                format!(
                    "expected a length in bytes that holds the message's {} signal{}, found 0 (a 0-byte frame carries no data)",
                    m.signal.len(),
                    if m.signal.len() == 1 { "" } else { "s" }
                ),
            );
            continue;
        }

        let mut used = [0u64; 8];
        let mut owner: Vec<(usize, u32)> = Vec::new();
        let mut signals: Vec<Signal> = Vec::new();
        let mut signal_names: HashSet<String> = HashSet::new();
        for (si, s) in m.signal.iter().enumerate() {
            let sk = |k: &str| format!("message[{mi}].signal[{si}].{k}");
            let sname = s.name.get_ref().trim().to_string();
            if sname.is_empty() {
                ctx.err(s.name.span(), &sk("name"), "expected a non-empty name");
            } else if !signal_names.insert(sname.clone()) {
                ctx.err(
                    s.name.span(),
                    &sk("name"),
                    format!("expected a unique signal name in the message; \"{sname}\" is already used"),
                );
            }
            let order = match s.byte_order.get_ref().as_str() {
                "little" => ByteOrder::Little,
                "big" => ByteOrder::Big,
                other => {
                    ctx.err(
                        s.byte_order.span(),
                        &sk("byte_order"),
                        format!("expected \"little\" or \"big\", found \"{other}\""),
                    );
                    continue;
                }
            };
            let len = *s.bit_length.get_ref();
            if !(1..=64).contains(&len) {
                ctx.err(s.bit_length.span(), &sk("bit_length"), format!("expected 1 to 64 bits, found {len}"));
                continue;
            }
            let start = *s.start_bit.get_ref();
            let frame_bits = length as u32 * 8;
            if start as u32 >= frame_bits {
                ctx.err(
                    s.start_bit.span(),
                    &sk("start_bit"),
                    format!(
                        "expected a bit inside the {length}-byte frame (0 to {}), found {start}",
                        frame_bits.saturating_sub(1)
                    ),
                );
                continue;
            }
            let bits = signal_bits(start, len, order);
            if let Some(&past) = bits.iter().find(|&&b| b >= frame_bits) {
                ctx.err(s.bit_length.span(), &sk("bit_length"), format!("expected the signal to fit the {length}-byte frame; {len} bits from bit {start} ({}) reach bit {past}", s.byte_order.get_ref()));
                continue;
            }
            let mut clash = None;
            for &b in &bits {
                if used[(b / 64) as usize] >> (b % 64) & 1 == 1 {
                    clash = owner.iter().find(|(_, ob)| *ob == b).map(|(o, _)| (*o, b));
                    break;
                }
            }
            if let Some((o, b)) = clash {
                ctx.err(
                    s.start_bit.span(),
                    &sk("start_bit"),
                    format!(
                        "expected no overlap; bit {b} is also used by signal[{o}] \"{}\"",
                        m.signal[o].name.get_ref()
                    ),
                );
                continue;
            }
            for &b in &bits {
                used[(b / 64) as usize] |= 1 << (b % 64);
                owner.push((si, b));
            }
            let scale = *s.scale.get_ref();
            if !scale.is_finite() || scale == 0.0 {
                ctx.err(s.scale.span(), &sk("scale"), format!("expected a non-zero finite number, found {scale}"));
            }
            let offset = s.offset.as_ref().map_or(0.0, |o| {
                let v = *o.get_ref();
                if !v.is_finite() {
                    ctx.err(o.span(), &sk("offset"), format!("expected a finite number, found {v}"));
                }
                v
            });
            let unit = match parse_unit(s.unit.get_ref()) {
                Some(u) => u,
                None => {
                    ctx.err(
                        s.unit.span(),
                        &sk("unit"),
                        format!("expected a known unit ({}), found \"{}\"", unit_names(), s.unit.get_ref()),
                    );
                    continue;
                }
            };
            let channel = s.channel.get_ref().trim().to_string();
            if !valid_channel_name(&channel) {
                ctx.err(
                    s.channel.span(),
                    &sk("channel"),
                    format!(
                        "expected a channel name of dot-separated letters, digits and underscores, found \"{channel}\""
                    ),
                );
            } else if let Some(dim) = canonical_dimension(&channel)
                && !unit.fits(dim)
            {
                ctx.err(
                    s.unit.span(),
                    &sk("unit"),
                    format!(
                        "expected a unit of {} for channel {channel}, found \"{}\" ({})",
                        dim.name(),
                        s.unit.get_ref(),
                        unit.dimension.name()
                    ),
                );
            }
            // The values the signal can carry, in SI: refused when either end
            // is not finite or lies past what a channel may hold, since every
            // such frame would only be rejected when it arrives.
            if scale.is_finite() && scale != 0.0 && offset.is_finite() {
                let (raw_lo, raw_hi) = if s.signed {
                    (-(2f64.powi(len as i32 - 1)), 2f64.powi(len as i32 - 1) - 1.0)
                } else {
                    (0.0, 2f64.powi(len as i32) - 1.0)
                };
                let ends = [raw_lo, raw_hi].map(|r| unit.to_si(r * scale + offset));
                if let Some(end) = ends.iter().find(|v| !(v.is_finite() && v.abs() <= MAX_MAGNITUDE)) {
                    ctx.err(
                        s.scale.span(),
                        &sk("scale"),
                        format!(
                            "expected a scale and offset whose range fits ±{MAX_MAGNITUDE:e} in SI units; {len} {} bits scaled by {scale:e} reach {end:e} {}",
                            if s.signed { "signed" } else { "unsigned" },
                            unit.dimension.si_unit(),
                        ),
                    );
                }
            }
            let min = s.min.as_ref().map(|v| *v.get_ref());
            let max = s.max.as_ref().map(|v| *v.get_ref());
            for (v, key) in [(&s.min, "min"), (&s.max, "max")] {
                if let Some(v) = v
                    && !v.get_ref().is_finite()
                {
                    ctx.err(v.span(), &sk(key), format!("expected a finite number, found {}", v.get_ref()));
                }
            }
            if let (Some(lo), Some(hi)) = (min, max)
                && lo > hi
            {
                let sp = s.max.as_ref().expect("some").span();
                ctx.err(sp, &sk("max"), format!("expected max ≥ min ({lo}), found {hi}"));
            }
            signals.push(Signal {
                name: sname,
                channel,
                start_bit: start,
                bit_length: len,
                byte_order: order,
                signed: s.signed,
                scale,
                offset,
                unit_name: s.unit.get_ref().clone(),
                unit,
                min,
                max,
            });
        }
        if m.signal.is_empty() {
            ctx.warn(
                m.name.span(),
                &mk("signal"),
                "message has no signals; its frames will be counted but not decoded",
            );
        }
        ids.entry(id).or_insert(messages.len());
        messages.push(Message { id, name, period_ns: (period_ms * 1e6).round() as i64, length, fd: m.fd, signals });
    }
    // The decoder numbers messages with 16 bits, one value kept for "none".
    if messages.len() > MAX_MESSAGES
        && let Some(m) = raw.message.get(MAX_MESSAGES)
    {
        ctx.err(
            m.id.span(),
            &format!("message[{MAX_MESSAGES}]"),
            format!("expected at most {MAX_MESSAGES} messages in a signal map, found {}", raw.message.len()),
        );
    }

    // One channel fed by several signals: usable, but the latest sample wins.
    // (A map: the first signal feeding each channel, found in constant time.)
    let mut fed: HashMap<&str, (usize, usize)> = HashMap::new();
    // Channels past the canonical ones, each of which takes a channel id.
    let mut new_channels = 0usize;
    for (mi, m) in messages.iter().enumerate() {
        for (si, s) in m.signal_iter_indexed() {
            let Some(raw_signal) = raw.message.get(mi).and_then(|r| r.signal.get(si)) else { continue };
            if let Some(&(fm, fs)) = fed.get(s.channel.as_str()) {
                let span = raw_signal.channel.span();
                let key = format!("message[{mi}].signal[{si}].channel");
                let first = format!("{} {}", messages[fm].name, messages[fm].signals[fs].name);
                ctx.warn(span, &key, format!("channel {} is also fed by {first}; the latest sample wins", s.channel));
            } else {
                fed.insert(&s.channel, (mi, si));
                if !CANONICAL.iter().any(|(n, _)| *n == s.channel) {
                    new_channels += 1;
                    if new_channels == MAX_CHANNELS - CANONICAL.len() + 1 {
                        ctx.err(
                            raw_signal.channel.span(),
                            &format!("message[{mi}].signal[{si}].channel"),
                            format!(
                                "expected at most {} channels besides the {} canonical ones; this is one more",
                                MAX_CHANNELS - CANONICAL.len(),
                                CANONICAL.len()
                            ),
                        );
                    }
                }
            }
        }
    }
    Some(Signals { bitrate, data_bitrate, gnss_period_ns, lines_period_ns, messages })
}

impl Message {
    fn signal_iter_indexed(&self) -> impl Iterator<Item = (usize, &Signal)> {
        self.signals.iter().enumerate()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn big_endian_walk() {
        // A 16-bit big-endian signal with its MSB at bit 7 occupies byte 0
        // then byte 1 (common practice for MSB-first layouts).
        let b = signal_bits(7, 16, ByteOrder::Big);
        assert_eq!(&b[..9], &[7, 6, 5, 4, 3, 2, 1, 0, 15]);
        assert_eq!(*b.last().unwrap(), 8);
        // A 12-bit big-endian signal starting at bit 3: 3..0, then 15..8.
        assert_eq!(signal_bits(3, 12, ByteOrder::Big), vec![3, 2, 1, 0, 15, 14, 13, 12, 11, 10, 9, 8]);
        assert_eq!(signal_bits(60, 4, ByteOrder::Little), vec![60, 61, 62, 63]);
    }
}
