//! CAN bus load from frame lengths.
//!
//! Classic frames: worst-case bit-stuffed length per Davis, Burns, Bril and
//! Lukkien, "Controller Area Network (CAN) schedulability analysis", Real-Time
//! Systems 35 (2007), eq. (1): `g + 8s + 13 + ⌊(g + 8s − 1)/4⌋` with g = 34
//! (11-bit id) or 54 (29-bit id), s data bytes, interframe space included;
//! the Linux kernel's `can_frame_bits()` gives the same. That is 55 + 10s
//! and 80 + 10s bits.
//!
//! CAN FD frames (ISO 11898-1:2015 frame layout, termvel's own derivation,
//! approximate): arbitration-phase fields at the nominal rate, data phase
//! (ESI, DLC, data, stuff count, CRC) at the data rate when the frame
//! switches bit rate, dynamic stuffing at worst case before the CRC field
//! and the fixed stuff bits of the CRC field.

use crate::config::signals::Signals;
use crate::event::CanId;

/// Worst-case bits on the wire of a classic frame with `data_len` bytes.
pub fn classic_bits_worst(extended: bool, data_len: usize) -> u32 {
    let g: u32 = if extended { 54 } else { 34 };
    let s = data_len as u32 * 8;
    g + s + 13 + (g + s - 1) / 4
}

/// Bits of a classic frame without stuffing.
pub fn classic_bits_unstuffed(extended: bool, data_len: usize) -> u32 {
    (if extended { 67 } else { 47 }) + 8 * data_len as u32
}

/// Worst-case time on the wire of a CAN FD frame, s.
pub fn fd_frame_time_s(extended: bool, data_len: usize, nominal_bps: f64, data_bps: f64) -> f64 {
    // SOF, id, (SRR, IDE, id ext), RRS, IDE/FDF, res, BRS.
    let arb: u32 = if extended { 1 + 11 + 1 + 1 + 18 + 1 + 1 + 1 + 1 } else { 1 + 11 + 1 + 1 + 1 + 1 + 1 };
    let arb_stuffed = arb + (arb - 1) / 4;
    // ESI, DLC, data with dynamic stuffing; then the stuff count (4 bits with
    // parity) and CRC with a fixed stuff bit every 4 bits, CRC delimiter.
    let dyn_bits = 1 + 4 + 8 * data_len as u32;
    let crc = if data_len <= 16 { 17 } else { 21 };
    let data_phase = dyn_bits + dyn_bits / 4 + 4 + crc + (4 + crc).div_ceil(4) + 1;
    // ACK slot, ACK delimiter, EOF 7, interframe space 3.
    let tail = 2 + 7 + 3;
    (arb_stuffed + tail) as f64 / nominal_bps + data_phase as f64 / data_bps
}

/// One message's share of the bus.
#[derive(Clone, Debug, PartialEq)]
pub struct MessageLoad {
    pub id: CanId,
    pub name: String,
    pub frames_per_s: f64,
    /// Fraction of the bus time, 0..1.
    pub load: f64,
}

/// The bus load of a signal map at its configured periods.
#[derive(Clone, Debug, PartialEq)]
pub struct BusLoad {
    pub bitrate: u32,
    pub frames_per_s: f64,
    /// Worst-case (stuffed) load, 0..1.
    pub worst: f64,
    /// Load without stuffing (classic frames) — the best case.
    pub best: f64,
    pub per_message: Vec<MessageLoad>,
}

/// Computes the bus load of `signals` at the configured periods.
pub fn bus_load(signals: &Signals) -> BusLoad {
    let nominal = signals.bitrate as f64;
    let data = signals.data_bitrate.unwrap_or(signals.bitrate) as f64;
    let mut worst = 0.0;
    let mut best = 0.0;
    let mut fps = 0.0;
    let mut per_message = Vec::new();
    for m in &signals.messages {
        let f = 1e9 / m.period_ns as f64;
        let ext = m.id.is_extended();
        let (tw, tb) = if m.fd {
            let t = fd_frame_time_s(ext, m.length as usize, nominal, data);
            (t, t)
        } else {
            (
                classic_bits_worst(ext, m.length as usize) as f64 / nominal,
                classic_bits_unstuffed(ext, m.length as usize) as f64 / nominal,
            )
        };
        worst += tw * f;
        best += tb * f;
        fps += f;
        per_message.push(MessageLoad { id: m.id, name: m.name.clone(), frames_per_s: f, load: tw * f });
    }
    BusLoad { bitrate: signals.bitrate, frames_per_s: fps, worst, best, per_message }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::signals::Message;

    #[test]
    fn classic_lengths_match_the_published_bounds() {
        // REFERENCES.md (Davis et al. 2007; Linux can_frame_bits): 55 + 10s
        // (11-bit) and 80 + 10s (29-bit) worst case; 47 + 8s and 67 + 8s unstuffed.
        for s in 0..=8 {
            assert_eq!(classic_bits_worst(false, s), 55 + 10 * s as u32);
            assert_eq!(classic_bits_worst(true, s), 80 + 10 * s as u32);
            assert_eq!(classic_bits_unstuffed(false, s), 47 + 8 * s as u32);
        }
        assert_eq!(classic_bits_worst(false, 8), 135);
        assert_eq!(classic_bits_unstuffed(false, 8), 111);
    }

    #[test]
    fn frame_rate_bounds_at_one_megabit() {
        // REFERENCES.md: 8-byte standard frames at 1 Mbit/s, 7 407 to 9 009 per second.
        assert_eq!((1e6 / classic_bits_worst(false, 8) as f64) as u32, 7407);
        assert_eq!((1e6 / classic_bits_unstuffed(false, 8) as f64) as u32, 9009);
    }

    #[test]
    fn reference_bus_load_example() {
        // REFERENCES.md: 20 standard 8-byte messages at 100 Hz plus 10 extended
        // 8-byte at 50 Hz on 500 kbit/s → 70.0 % worst case.
        let mut messages = Vec::new();
        for i in 0..20 {
            messages.push(Message {
                id: CanId::Standard(i),
                name: format!("s{i}"),
                period_ns: 10_000_000,
                length: 8,
                fd: false,
                signals: vec![],
            });
        }
        for i in 0..10 {
            messages.push(Message {
                id: CanId::Extended(0x1000 + i),
                name: format!("e{i}"),
                period_ns: 20_000_000,
                length: 8,
                fd: false,
                signals: vec![],
            });
        }
        let s = Signals { bitrate: 500_000, data_bitrate: None, gnss_period_ns: 0, lines_period_ns: 0, messages };
        let l = bus_load(&s);
        assert!((l.worst - 0.700).abs() < 1e-9, "{}", l.worst);
        assert_eq!(l.frames_per_s, 2500.0);
    }

    #[test]
    fn fd_with_bit_rate_switch_is_shorter_than_without() {
        let slow = fd_frame_time_s(false, 64, 500e3, 500e3);
        let fast = fd_frame_time_s(false, 64, 500e3, 2e6);
        assert!(fast < slow * 0.5, "{fast} vs {slow}");
        // An FD frame of 8 bytes without switching is longer than a classic one
        // (longer CRC, stuff count, fixed stuff bits).
        assert!(fd_frame_time_s(false, 8, 500e3, 500e3) > classic_bits_worst(false, 8) as f64 / 500e3);
    }
}
