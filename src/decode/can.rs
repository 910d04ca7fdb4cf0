//! CAN signal decoding: frames to samples in SI units, through the signal map.
//!
//! The map is compiled once into flat per-signal records (byte window, shift,
//! mask, the affine map to SI), and ids are found through a direct table for
//! standard ids and a sorted list for extended ones, so decoding a frame
//! costs a lookup and a few integer operations per signal.

use crate::channel::{ChannelId, ChannelTable, canonical_dimension};
use crate::config::signals::{ByteOrder, Message, Signal, Signals, signal_bits};
use crate::event::{CanFrame, CanId, TimeNs};

/// A decoded value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sample {
    pub t_ns: TimeNs,
    pub channel: ChannelId,
    /// SI value (see [`crate::units`]).
    pub value: f64,
    /// False when the value was outside the signal's valid range: it is
    /// shown and counted, but not used as truth.
    pub valid: bool,
}

/// One signal, compiled for decoding.
#[derive(Clone, Debug)]
struct CompiledSignal {
    channel: ChannelId,
    /// First payload byte of the window.
    lo: u8,
    /// Bytes in the window (1 to 9).
    nbytes: u8,
    /// Right shift that brings the least significant bit to bit 0.
    shift: u8,
    bits: u8,
    /// Shift of the least significant bit in the frame's payload read as
    /// one 64-bit word (little-endian word for `little` signals, big-endian
    /// for `big`), for classic frames; `need` bytes must be present.
    shift8: u8,
    need: u8,
    mask: u64,
    big: bool,
    signed: bool,
    scale: f64,
    offset: f64,
    si_factor: f64,
    si_offset: f64,
    min: f64,
    max: f64,
}

/// One message, compiled.
#[derive(Clone, Debug)]
struct CompiledMessage {
    signals: Vec<CompiledSignal>,
}

/// Frames received per message, for the rate check.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct MessageCount {
    pub name: String,
    pub period_ns: TimeNs,
    pub frames: u64,
}

/// Counters kept while decoding CAN frames.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct CanCounters {
    /// Data and FD frames seen.
    pub frames: u64,
    /// Frames whose id is not in the map.
    pub unmapped: u64,
    /// Signals skipped because the frame was shorter than the signal needs.
    pub short: u64,
    /// Values outside their signal's valid range.
    pub out_of_range: u64,
    pub remote_frames: u64,
    pub error_frames: u64,
}

const NONE: u16 = u16::MAX;

/// The signal map compiled for decoding.
#[derive(Clone, Debug)]
pub struct CanMap {
    std_index: Box<[u16]>,
    ext_index: Vec<(u32, u16)>,
    messages: Vec<CompiledMessage>,
    pub counters: CanCounters,
    /// The message each channel is decoded from (the first, if several).
    pub channel_message: Vec<(ChannelId, String)>,
    /// Frames received per message, in the map's order.
    pub message_counts: Vec<MessageCount>,
}

impl CanMap {
    /// Compiles `signals`, interning every fed channel into `channels` and
    /// recording each channel's expected period.
    pub fn compile(signals: &Signals, channels: &mut ChannelTable) -> CanMap {
        let mut std_index = vec![NONE; 0x800].into_boxed_slice();
        let mut ext_index = Vec::new();
        let mut messages = Vec::with_capacity(signals.messages.len());
        let mut channel_message: Vec<(ChannelId, String)> = Vec::new();
        // The channels already in `channel_message`: a set, so a map of
        // 40 000 messages compiles in linear time.
        let mut named = std::collections::HashSet::new();
        for (mi, m) in signals.messages.iter().enumerate() {
            match m.id {
                CanId::Standard(id) => std_index[id as usize] = mi as u16,
                CanId::Extended(id) => ext_index.push((id, mi as u16)),
            }
            // A signal whose channel does not fit the table is not decoded;
            // `check` refuses a map with more channels than the table holds,
            // so a validated map never meets this.
            let compiled: Vec<CompiledSignal> =
                m.signals.iter().filter_map(|s| compile_signal(m, s, channels)).collect();
            for s in &compiled {
                if named.insert(s.channel) {
                    channel_message.push((s.channel, m.name.clone()));
                }
            }
            messages.push(CompiledMessage { signals: compiled });
        }
        ext_index.sort_unstable();
        let message_counts = signals
            .messages
            .iter()
            .map(|m| MessageCount { name: m.name.clone(), period_ns: m.period_ns, frames: 0 })
            .collect();
        CanMap { std_index, ext_index, messages, counters: CanCounters::default(), channel_message, message_counts }
    }

    fn message_index(&self, id: CanId) -> Option<usize> {
        let i = match id {
            CanId::Standard(s) => self.std_index[s as usize],
            CanId::Extended(e) => match self.ext_index.binary_search_by_key(&e, |(k, _)| *k) {
                Ok(p) => self.ext_index[p].1,
                Err(_) => NONE,
            },
        };
        (i != NONE).then_some(i as usize)
    }

    /// Whether `id` is in the map.
    pub fn contains(&self, id: CanId) -> bool {
        self.message_index(id).is_some()
    }

    /// Decodes one frame, appending its samples to `out`.
    #[inline]
    pub fn decode(&mut self, t_ns: TimeNs, frame: &CanFrame, out: &mut Vec<Sample>) {
        let (id, data) = match frame {
            CanFrame::Data(f) => (f.id(), f.data()),
            CanFrame::Fd(f) => (f.id(), f.data()),
            CanFrame::Remote(_) => {
                self.counters.remote_frames += 1;
                return;
            }
            CanFrame::Error(_) => {
                self.counters.error_frames += 1;
                return;
            }
        };
        self.counters.frames += 1;
        let Some(mi) = self.message_index(id) else {
            self.counters.unmapped += 1;
            return;
        };
        self.message_counts[mi].frames += 1;
        let len = data.len();
        if len <= 8 {
            // A classic payload is one 64-bit word: read it once both ways
            // and take each signal with a shift and a mask.
            let mut b = [0u8; 8];
            b[..len].copy_from_slice(data);
            let (le, be) = (u64::from_le_bytes(b), u64::from_be_bytes(b));
            let msg = &self.messages[mi];
            out.reserve(msg.signals.len());
            for s in &msg.signals {
                if s.need as usize > len {
                    self.counters.short += 1;
                    continue;
                }
                let word = if s.big { be } else { le };
                let raw = (word >> s.shift8) & s.mask;
                let raw = if s.signed && s.bits < 64 && raw >> (s.bits - 1) & 1 == 1 {
                    (raw | !s.mask) as i64 as f64
                } else if s.signed {
                    raw as i64 as f64
                } else {
                    raw as f64
                };
                let phys = raw * s.scale + s.offset;
                let valid = phys >= s.min && phys <= s.max;
                if !valid {
                    self.counters.out_of_range += 1;
                }
                out.push(Sample { t_ns, channel: s.channel, value: phys * s.si_factor + s.si_offset, valid });
            }
        } else {
            // FD: a zero-padded copy so every window read is in bounds.
            let mut buf = [0u8; 80];
            buf[..len].copy_from_slice(data);
            self.decode_signals(mi, t_ns, &buf, len, out);
        }
    }

    #[inline(always)]
    fn decode_signals<const N: usize>(
        &mut self,
        mi: usize,
        t_ns: TimeNs,
        buf: &[u8; N],
        len: usize,
        out: &mut Vec<Sample>,
    ) {
        for s in &self.messages[mi].signals {
            if (s.lo + s.nbytes) as usize > len {
                self.counters.short += 1;
                continue;
            }
            let raw = extract(buf, s);
            let phys = raw * s.scale + s.offset;
            let valid = phys >= s.min && phys <= s.max;
            if !valid {
                self.counters.out_of_range += 1;
            }
            out.push(Sample { t_ns, channel: s.channel, value: phys * s.si_factor + s.si_offset, valid });
        }
    }
}

#[inline(always)]
fn extract<const N: usize>(buf: &[u8; N], s: &CompiledSignal) -> f64 {
    let lo = s.lo as usize;
    let bits = s.bits as u32;
    let raw: u64 = if s.nbytes <= 8 {
        let w = if s.big {
            let w = u64::from_be_bytes(buf[lo..lo + 8].try_into().expect("8 bytes"));
            w >> (8 * (8 - s.nbytes as u32))
        } else {
            u64::from_le_bytes(buf[lo..lo + 8].try_into().expect("8 bytes"))
        };
        w >> s.shift
    } else {
        let w = if s.big {
            let w = u128::from_be_bytes(buf[lo..lo + 16].try_into().expect("16 bytes"));
            w >> (8 * (16 - s.nbytes as u32))
        } else {
            u128::from_le_bytes(buf[lo..lo + 16].try_into().expect("16 bytes"))
        };
        (w >> s.shift) as u64
    };
    let raw = if bits == 64 { raw } else { raw & ((1u64 << bits) - 1) };
    if s.signed && bits < 64 && raw >> (bits - 1) & 1 == 1 {
        (raw | !((1u64 << bits) - 1)) as i64 as f64
    } else if s.signed {
        raw as i64 as f64
    } else {
        raw as f64
    }
}

fn compile_signal(m: &Message, s: &Signal, channels: &mut ChannelTable) -> Option<CompiledSignal> {
    let dim = canonical_dimension(&s.channel).unwrap_or(s.unit.dimension);
    let channel = channels.try_intern(&s.channel, dim).ok()?;
    channels.expect_period(channel, m.period_ns);
    let positions = signal_bits(s.start_bit, s.bit_length, s.byte_order);
    let (lo, hi, shift) = match s.byte_order {
        ByteOrder::Little => {
            let first = positions[0];
            let last = *positions.last().expect("at least one bit");
            (first / 8, last / 8, first % 8)
        }
        ByteOrder::Big => {
            let msb = positions[0];
            let lsb = *positions.last().expect("at least one bit");
            (msb / 8, lsb / 8, lsb % 8)
        }
    };
    // In a 64-bit word of the first eight payload bytes, payload bit n is
    // word bit n little-endian, and word bit (7 − n/8)·8 + n%8 big-endian.
    let lsb = *positions.last().expect("at least one bit");
    let lsb = if s.byte_order == ByteOrder::Little { positions[0] } else { lsb };
    let shift8 = match s.byte_order {
        ByteOrder::Little => lsb,
        ByteOrder::Big => (7u32.saturating_sub(lsb / 8)) * 8 + lsb % 8,
    };
    Some(CompiledSignal {
        channel,
        lo: lo as u8,
        nbytes: (hi - lo + 1) as u8,
        shift: shift as u8,
        bits: s.bit_length,
        shift8: shift8.min(63) as u8,
        need: (hi + 1) as u8,
        mask: if s.bit_length == 64 { u64::MAX } else { (1u64 << s.bit_length) - 1 },
        big: s.byte_order == ByteOrder::Big,
        signed: s.signed,
        scale: s.scale,
        offset: s.offset,
        si_factor: s.unit.factor,
        si_offset: s.unit.offset,
        min: s.min.unwrap_or(f64::NEG_INFINITY),
        max: s.max.unwrap_or(f64::INFINITY),
    })
}

/// The raw integer a physical value encodes to, saturated to what the
/// signal's bits can hold.
pub fn raw_for(s: &Signal, phys: f64) -> i128 {
    let r = ((phys - s.offset) / s.scale).round();
    let bits = s.bit_length as u32;
    let (lo, hi) =
        if s.signed { (-(1i128 << (bits - 1)), (1i128 << (bits - 1)) - 1) } else { (0, (1i128 << bits) - 1) };
    if r.is_nan() { 0 } else { (r as i128).clamp(lo, hi) }
}

/// Writes physical value `phys` (in the signal's own unit) into `data`,
/// saturating at the signal's range of raw values. The inverse of decoding,
/// used by the simulator and by tests.
pub fn encode_signal(s: &Signal, phys: f64, data: &mut [u8]) {
    let raw = raw_for(s, phys) as u64; // two's complement for negatives
    let positions = signal_bits(s.start_bit, s.bit_length, s.byte_order);
    let n = positions.len();
    for (i, &p) in positions.iter().enumerate() {
        // positions[0] is the LSB for little, the MSB for big.
        let bit_index = match s.byte_order {
            ByteOrder::Little => i,
            ByteOrder::Big => n - 1 - i,
        };
        let bit = (raw >> bit_index) & 1;
        let byte = &mut data[(p / 8) as usize];
        let mask = 1u8 << (p % 8);
        if bit == 1 {
            *byte |= mask;
        } else {
            *byte &= !mask;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{DataFrame, FdFrame};
    use crate::units::parse_unit;

    fn sig(start: u16, len: u8, order: ByteOrder, signed: bool, scale: f64, offset: f64, unit: &str) -> Signal {
        Signal {
            name: "s".into(),
            channel: "test.value".into(),
            start_bit: start,
            bit_length: len,
            byte_order: order,
            signed,
            scale,
            offset,
            unit_name: unit.into(),
            unit: parse_unit(unit).unwrap(),
            min: None,
            max: None,
        }
    }

    fn map_of(id: CanId, length: u8, fd: bool, signals: Vec<Signal>) -> (CanMap, ChannelTable) {
        let mut t = ChannelTable::default();
        let s = Signals {
            bitrate: 500_000,
            data_bitrate: None,
            gnss_period_ns: 100_000_000,
            lines_period_ns: 100_000_000,
            messages: vec![Message { id, name: "m".into(), period_ns: 10_000_000, length, fd, signals }],
        };
        (CanMap::compile(&s, &mut t), t)
    }

    fn decode_one(map: &mut CanMap, frame: CanFrame) -> Vec<Sample> {
        let mut out = Vec::new();
        map.decode(0, &frame, &mut out);
        out
    }

    #[test]
    fn little_endian_unsigned_by_hand() {
        // Bytes 0x34 0x12: little-endian 16-bit value 0x1234 = 4660.
        // 4660 · 0.01 km/h = 46.60 km/h = 12.9444 m/s.
        let (mut m, _) =
            map_of(CanId::Standard(0x100), 8, false, vec![sig(0, 16, ByteOrder::Little, false, 0.01, 0.0, "km/h")]);
        let f = CanFrame::Data(DataFrame::new(CanId::Standard(0x100), &[0x34, 0x12, 0, 0, 0, 0, 0, 0]).unwrap());
        let s = decode_one(&mut m, f);
        assert_eq!(s.len(), 1);
        assert!((s[0].value - 46.60 / 3.6).abs() < 1e-12);
    }

    #[test]
    fn little_endian_signed_unaligned_by_hand() {
        // 12-bit signed at bit 4: byte0 = 0xF0 (upper nibble 0xF), byte1 = 0xFF
        // → raw bits 4..15 = 0xFFF = -1; · 0.5 + 10 = 9.5.
        let (mut m, _) =
            map_of(CanId::Standard(0x1), 2, false, vec![sig(4, 12, ByteOrder::Little, true, 0.5, 10.0, "V")]);
        let f = CanFrame::Data(DataFrame::new(CanId::Standard(0x1), &[0xF0, 0xFF]).unwrap());
        assert_eq!(decode_one(&mut m, f)[0].value, 9.5);
        // byte0 = 0x30, byte1 = 0x01 → bits 4..15 = 0x013 = 19 → 19.5.
        let f = CanFrame::Data(DataFrame::new(CanId::Standard(0x1), &[0x30, 0x01]).unwrap());
        assert_eq!(decode_one(&mut m, f)[0].value, 19.5);
    }

    #[test]
    fn big_endian_by_hand() {
        // 16-bit big-endian with MSB at bit 7: bytes 0x12 0x34 → 0x1234 = 4660.
        let (mut m, _) = map_of(CanId::Standard(0x2), 8, false, vec![sig(7, 16, ByteOrder::Big, false, 1.0, 0.0, "")]);
        let f = CanFrame::Data(DataFrame::new(CanId::Standard(0x2), &[0x12, 0x34, 0, 0, 0, 0, 0, 0]).unwrap());
        assert_eq!(decode_one(&mut m, f)[0].value, 4660.0);
        // 12-bit big-endian from bit 55: byte 6 is the top 8 bits, the high
        // nibble of byte 7 the low 4: 0xAB, 0xC0 → 0xABC = 2748.
        let (mut m, _) = map_of(CanId::Standard(0x3), 8, false, vec![sig(55, 12, ByteOrder::Big, false, 1.0, 0.0, "")]);
        let f = CanFrame::Data(DataFrame::new(CanId::Standard(0x3), &[0, 0, 0, 0, 0, 0, 0xAB, 0xC5]).unwrap());
        assert_eq!(decode_one(&mut m, f)[0].value, 2748.0);
        // Signed big-endian 16-bit: 0xFF 0x38 = -200 · 0.05 A = -10 A.
        let (mut m, _) = map_of(CanId::Standard(0x4), 8, false, vec![sig(7, 16, ByteOrder::Big, true, 0.05, 0.0, "A")]);
        let f = CanFrame::Data(DataFrame::new(CanId::Standard(0x4), &[0xFF, 0x38, 0, 0, 0, 0, 0, 0]).unwrap());
        assert!((decode_one(&mut m, f)[0].value + 10.0).abs() < 1e-12);
    }

    #[test]
    fn sixty_four_bit_unaligned_uses_nine_bytes() {
        // 64-bit little-endian starting at bit 4 spans bytes 0..=8 of an FD frame.
        let (mut m, _) =
            map_of(CanId::Standard(0x5), 12, true, vec![sig(4, 64, ByteOrder::Little, false, 1.0, 0.0, "count")]);
        let mut d = [0u8; 12];
        d[0] = 0x10; // bit 4 set → raw bit 0
        d[8] = 0x08; // bit 67 → raw bit 63
        let f = CanFrame::Fd(FdFrame::new(CanId::Standard(0x5), 0, &d).unwrap());
        assert_eq!(decode_one(&mut m, f)[0].value, (1u64 | 1 << 63) as f64);
    }

    #[test]
    fn fd_payload_beyond_eight_bytes() {
        let (mut m, _) = map_of(
            CanId::Extended(0x18FF0001),
            64,
            true,
            vec![sig(500, 8, ByteOrder::Little, false, 1.0, -40.0, "°C")],
        );
        let mut d = [0u8; 64];
        d[62] = 0x50; // bit 500 = byte 62 bit 4: raw = 0x05 | (0x01 << 4)? no: byte 62 >> 4 = 5, byte 63 low nibble 0
        d[63] = 0x01; // raw = 5 | 1 << 4 = 21 → -19 °C
        let f = CanFrame::Fd(FdFrame::new(CanId::Extended(0x18FF0001), 1, &d).unwrap());
        assert_eq!(decode_one(&mut m, f)[0].value, -19.0);
    }

    #[test]
    fn short_frames_and_range_are_counted() {
        let mut s = sig(48, 16, ByteOrder::Little, false, 1.0, 0.0, "");
        s.max = Some(100.0);
        let (mut m, _) = map_of(CanId::Standard(0x6), 8, false, vec![s]);
        let short = CanFrame::Data(DataFrame::new(CanId::Standard(0x6), &[0; 6]).unwrap());
        assert!(decode_one(&mut m, short).is_empty());
        assert_eq!(m.counters.short, 1);
        let big = CanFrame::Data(DataFrame::new(CanId::Standard(0x6), &[0, 0, 0, 0, 0, 0, 0xFF, 0]).unwrap());
        let out = decode_one(&mut m, big);
        assert!(!out[0].valid, "255 > max 100 is flagged");
        assert_eq!(m.counters.out_of_range, 1);
        let other = CanFrame::Data(DataFrame::new(CanId::Standard(0x7), &[0; 8]).unwrap());
        assert!(decode_one(&mut m, other).is_empty());
        assert_eq!(m.counters.unmapped, 1);
    }

    #[test]
    fn encode_by_hand() {
        let mut d = [0u8; 8];
        encode_signal(&sig(7, 16, ByteOrder::Big, false, 1.0, 0.0, ""), 4660.0, &mut d);
        assert_eq!(&d[..2], &[0x12, 0x34]);
        let mut d = [0u8; 8];
        encode_signal(&sig(0, 16, ByteOrder::Little, false, 0.01, 0.0, "km/h"), 46.6, &mut d);
        assert_eq!(&d[..2], &[0x34, 0x12]);
        // Saturates instead of wrapping.
        let mut d = [0u8; 1];
        encode_signal(&sig(0, 8, ByteOrder::Little, false, 1.0, 0.0, ""), 300.0, &mut d);
        assert_eq!(d[0], 0xFF);
    }
}
