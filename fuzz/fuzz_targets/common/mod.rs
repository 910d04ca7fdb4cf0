//! Helpers shared by the fuzz targets: a byte cursor that turns fuzz input
//! into CAN frames, and a reference signal decoder written from the
//! definition (bit by bit) to check the compiled signal map against.

#![allow(dead_code)]

use termvel::config::signals::{ByteOrder, Signal, Signals, signal_bits};
use termvel::decode::Sample;
use termvel::event::{CanFrame, CanId, DataFrame, ErrorFrame, FdFrame, RemoteFrame};

/// Reads fuzz input front to back; past the end it yields zeros.
pub struct Cursor<'a> {
    pub data: &'a [u8],
}

impl<'a> Cursor<'a> {
    pub fn new(data: &'a [u8]) -> Self {
        Cursor { data }
    }

    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }

    pub fn u8(&mut self) -> u8 {
        match self.data.split_first() {
            Some((&b, rest)) => {
                self.data = rest;
                b
            }
            None => 0,
        }
    }

    pub fn u32(&mut self) -> u32 {
        u32::from_le_bytes([self.u8(), self.u8(), self.u8(), self.u8()])
    }

    /// Up to `n` bytes (fewer at the end of the input).
    pub fn take(&mut self, n: usize) -> &'a [u8] {
        let n = n.min(self.data.len());
        let (a, b) = self.data.split_at(n);
        self.data = b;
        a
    }

    /// Exactly `n` bytes into `out[..n]`, zero-padded past the end.
    pub fn fill(&mut self, out: &mut [u8]) {
        let got = self.take(out.len());
        out[..got.len()].copy_from_slice(got);
        out[got.len()..].fill(0);
    }

    /// A CAN frame of any kind. When `ids` is not empty, most frames take
    /// one of those ids (the mapped ones), so decoding is reached.
    pub fn frame(&mut self, ids: &[CanId]) -> CanFrame {
        let sel = self.u8();
        let id = if sel & 0x04 != 0 && !ids.is_empty() {
            ids[self.u8() as usize % ids.len()]
        } else if sel & 0x08 != 0 {
            CanId::Extended(self.u32() & CanId::EXTENDED_MAX)
        } else {
            CanId::Standard((self.u32() & CanId::STANDARD_MAX) as u16)
        };
        let mut buf = [0u8; 64];
        match sel & 0x03 {
            0 => {
                let n = self.u8() as usize % 9;
                self.fill(&mut buf[..n]);
                CanFrame::Data(DataFrame::new(id, &buf[..n]).expect("at most 8"))
            }
            1 => {
                let b = self.u8();
                let n = FdFrame::LENGTHS[(b & 0x0F) as usize];
                self.fill(&mut buf[..n]);
                CanFrame::Fd(FdFrame::new(id, b >> 4, &buf[..n]).expect("valid FD length"))
            }
            2 => CanFrame::Remote(RemoteFrame::new(id, self.u8() & 0x0F).expect("at most 15")),
            _ => {
                let class = self.u32() & CanId::EXTENDED_MAX;
                let n = self.u8() as usize % 9;
                self.fill(&mut buf[..n]);
                CanFrame::Error(ErrorFrame::new(class, &buf[..n]).expect("valid error frame"))
            }
        }
    }
}

/// The value of one signal in `data`, from the definition: the bits listed
/// by `signal_bits` (LSB first for little, MSB first for big), sign-extended,
/// then scaled exactly as the decoder does. `None` when the payload is too
/// short for the signal.
pub fn reference_value(s: &Signal, data: &[u8]) -> Option<(f64, bool)> {
    let bits = signal_bits(s.start_bit, s.bit_length, s.byte_order);
    if bits.iter().any(|&b| (b / 8) as usize >= data.len()) {
        return None;
    }
    let n = bits.len();
    let mut raw: u64 = 0;
    for (i, &p) in bits.iter().enumerate() {
        let bit = (data[(p / 8) as usize] >> (p % 8)) & 1;
        // Position of this bit in the raw value.
        let k = match s.byte_order {
            ByteOrder::Little => i,
            ByteOrder::Big => n - 1 - i,
        };
        raw |= u64::from(bit) << k;
    }
    let raw = if s.signed {
        // Sign-extend from n bits.
        let v = if n < 64 && raw >> (n - 1) & 1 == 1 { raw | (u64::MAX << n) } else { raw };
        v as i64 as f64
    } else {
        raw as f64
    };
    let phys = raw * s.scale + s.offset;
    let valid = phys >= s.min.unwrap_or(f64::NEG_INFINITY) && phys <= s.max.unwrap_or(f64::INFINITY);
    Some((phys * s.unit.factor + s.unit.offset, valid))
}

/// Checks that `got` (what the compiled map produced for `frame`) is what
/// the reference decoder gives for the message of `signals` with the
/// frame's id. `channel_of` names each signal's channel id.
pub fn check_samples(
    signals: &Signals,
    frame: &CanFrame,
    t_ns: i64,
    got: &[Sample],
    channel_of: impl Fn(&str) -> termvel::channel::ChannelId,
) {
    let (id, data) = match frame {
        CanFrame::Data(f) => (f.id(), f.data()),
        CanFrame::Fd(f) => (f.id(), f.data()),
        CanFrame::Remote(_) | CanFrame::Error(_) => {
            assert!(got.is_empty(), "remote and error frames give no samples");
            return;
        }
    };
    let Some(m) = signals.messages.iter().find(|m| m.id == id) else {
        assert!(got.is_empty(), "an unmapped id gives no samples");
        return;
    };
    let want: Vec<(&Signal, (f64, bool))> =
        m.signals.iter().filter_map(|s| reference_value(s, data).map(|v| (s, v))).collect();
    assert_eq!(got.len(), want.len(), "samples of {frame:?}: got {got:?}");
    for (g, (s, (value, valid))) in got.iter().zip(&want) {
        assert_eq!(g.t_ns, t_ns);
        assert_eq!(g.channel, channel_of(&s.channel), "channel of signal {}", s.name);
        assert!(
            g.value.to_bits() == value.to_bits() || (g.value.is_nan() && value.is_nan()),
            "signal {} of {frame:?}: decoder {} vs reference {}",
            s.name,
            g.value,
            value
        );
        assert_eq!(g.valid, *valid, "validity of signal {} of {frame:?} ({})", s.name, g.value);
    }
}
