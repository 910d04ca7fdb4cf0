//! CAN signal layouts under random generation: whatever the layout, a value
//! encoded into a frame decodes back to itself within one scale step, and
//! bits outside the signal are left alone.

use proptest::prelude::*;
use termvel::channel::ChannelTable;
use termvel::config::Signals;
use termvel::config::signals::{ByteOrder, Message, Signal, signal_bits};
use termvel::decode::CanMap;
use termvel::decode::can::encode_signal;
use termvel::event::{CanFrame, CanId, DataFrame, FdFrame};
use termvel::units::parse_unit;

const FD_LENGTHS: [u8; 16] = [0, 1, 2, 3, 4, 5, 6, 7, 8, 12, 16, 20, 24, 32, 48, 64];

#[derive(Debug, Clone)]
struct Case {
    fd: bool,
    length: u8,
    start: u16,
    bits: u8,
    big: bool,
    signed: bool,
    scale: f64,
    offset: f64,
    unit: &'static str,
    /// Where in the representable range the value lies, 0..1.
    at: f64,
    /// Background bytes, to check bits outside the signal survive.
    fill: u8,
}

fn case() -> impl Strategy<Value = Case> {
    (
        any::<bool>(),
        0usize..16,
        1u8..=8,
        0u16..512,
        1u8..=64,
        any::<bool>(),
        any::<bool>(),
        (-4.0f64..2.0, any::<bool>()),
        -1000.0f64..1000.0,
        prop::sample::select(vec!["km/h", "kPa", "°C", "%", "kW", "V", ""]),
        0.0f64..1.0,
        any::<u8>(),
    )
        .prop_map(|(fd, fdi, classic, start, bits, big, signed, (exp, neg), offset, unit, at, fill)| {
            let length = if fd { FD_LENGTHS[fdi].max(1) } else { classic };
            let frame_bits = length as u16 * 8;
            let bits = bits.min(frame_bits.min(64) as u8);
            // Only layouts that fit the frame: the starts whose bit walk
            // stays inside it, one picked by `start`.
            let order = if big { ByteOrder::Big } else { ByteOrder::Little };
            let fits: Vec<u16> = (0..frame_bits)
                .filter(|&s| signal_bits(s, bits, order).iter().all(|&p| p < frame_bits as u32))
                .collect();
            let scale = 10f64.powf(exp) * if neg { -1.0 } else { 1.0 };
            Case {
                fd,
                length,
                start: fits[start as usize % fits.len()],
                bits,
                big,
                signed,
                scale,
                offset,
                unit,
                at,
                fill,
            }
        })
}

fn signal_of(c: &Case) -> Signal {
    Signal {
        name: "s".into(),
        channel: "test.value".into(),
        start_bit: c.start,
        bit_length: c.bits,
        byte_order: if c.big { ByteOrder::Big } else { ByteOrder::Little },
        signed: c.signed,
        scale: c.scale,
        offset: c.offset,
        unit_name: c.unit.into(),
        unit: parse_unit(c.unit).unwrap(),
        min: None,
        max: None,
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 4000, ..ProptestConfig::default() })]

    #[test]
    fn encode_then_decode_is_within_one_scale_step(c in case()) {
        let sig = signal_of(&c);
        let positions = signal_bits(sig.start_bit, sig.bit_length, sig.byte_order);
        assert!(positions.iter().all(|&p| p < c.length as u32 * 8), "the generator only makes layouts that fit");
        // A value inside the representable range, kept within 2^52 raw
        // steps so f64 holds the raw integer exactly.
        let bits = c.bits.min(52) as i32;
        let (lo, hi) = if c.signed { (-(2f64.powi(bits - 1)), 2f64.powi(bits - 1) - 1.0) } else { (0.0, 2f64.powi(bits) - 1.0) };
        let raw = (lo + c.at * (hi - lo)).round();
        let phys = raw * c.scale + c.offset + c.scale * 0.3 * (c.at - 0.5);
        let mut data = vec![c.fill; c.length as usize];
        encode_signal(&sig, phys, &mut data);
        // Bits outside the signal are untouched.
        for byte in 0..c.length as u32 {
            for bit in 0..8 {
                let p = byte * 8 + bit;
                if !positions.contains(&p) {
                    prop_assert_eq!((data[byte as usize] >> bit) & 1, (c.fill >> bit) & 1, "bit {} changed", p);
                }
            }
        }
        let id = CanId::Standard(0x321);
        let frame = if c.fd {
            CanFrame::Fd(FdFrame::new(id, 0, &data).unwrap())
        } else {
            CanFrame::Data(DataFrame::new(id, &data).unwrap())
        };
        let signals = Signals {
            bitrate: 500_000,
            data_bitrate: None,
            gnss_period_ns: 100_000_000,
            lines_period_ns: 100_000_000,
            messages: vec![Message { id, name: "m".into(), period_ns: 10_000_000, length: c.length, fd: c.fd, signals: vec![sig.clone()] }],
        };
        let mut table = ChannelTable::default();
        let mut map = CanMap::compile(&signals, &mut table);
        let mut out = Vec::new();
        map.decode(0, &frame, &mut out);
        prop_assert_eq!(out.len(), 1);
        let back = sig.unit.from_si(out[0].value);
        let step = c.scale.abs();
        prop_assert!((back - phys).abs() <= step * 0.5 + 1e-9 * phys.abs().max(1.0), "{} -> {} (step {})", phys, back, step);
    }
}

#[test]
fn decode_handles_the_extreme_layouts() {
    // Full 64-bit signals, both orders, in an 8-byte frame: all bits set
    // is u64::MAX unsigned and -1 signed.
    for (order, start) in [(ByteOrder::Little, 0u16), (ByteOrder::Big, 7)] {
        for signed in [false, true] {
            let mut sig = signal_of(&Case {
                fd: false,
                length: 8,
                start,
                bits: 64,
                big: order == ByteOrder::Big,
                signed,
                scale: 1.0,
                offset: 0.0,
                unit: "",
                at: 0.0,
                fill: 0,
            });
            sig.byte_order = order;
            let id = CanId::Standard(1);
            let signals = Signals {
                bitrate: 500_000,
                data_bitrate: None,
                gnss_period_ns: 0,
                lines_period_ns: 0,
                messages: vec![Message {
                    id,
                    name: "m".into(),
                    period_ns: 1,
                    length: 8,
                    fd: false,
                    signals: vec![sig],
                }],
            };
            let mut map = CanMap::compile(&signals, &mut ChannelTable::default());
            let mut out = Vec::new();
            map.decode(0, &CanFrame::Data(DataFrame::new(id, &[0xFF; 8]).unwrap()), &mut out);
            let expected = if signed { -1.0 } else { u64::MAX as f64 };
            assert_eq!(out[0].value, expected, "{order:?} signed={signed}");
        }
    }
}
