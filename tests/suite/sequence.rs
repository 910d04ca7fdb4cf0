//! Sequence-numbered CAN frames, the load tests' way of proving nothing was
//! lost: the sender numbers its frames (the number in the 8 data bytes,
//! little-endian, under one id), and a gap in the numbers read back from
//! the recording is a lost frame. Shared by the load test, the soak and the
//! live benchmark.

use termvel::decode::slcan;
use termvel::event::{CanFrame, CanId, DataFrame, Payload};
use termvel::record::RecordingReader;

/// Appends frame number `n` under standard id `id` to `buf` as an slcan
/// adapter sends it (a `t` message and its carriage return).
pub fn push_slcan(buf: &mut String, id: u16, n: u64) {
    let f = CanFrame::Data(DataFrame::new(CanId::Standard(id), &n.to_le_bytes()).unwrap());
    buf.push_str(&slcan::encode(&f, None).unwrap());
    buf.push('\r');
}

/// What a recording holds of the numbered frames.
#[derive(Debug, Default)]
pub struct Count {
    /// One past the last number read.
    pub next: u64,
    /// Numbers skipped, plus those after the last one read up to `sent`.
    pub missing: u64,
    /// Frames whose number came below one already read.
    pub out_of_order: u64,
}

/// Reads `r` to its end, counting the numbered frames under `id` against
/// `sent` frames sent; `other` sees every other event.
pub fn count(
    r: &mut RecordingReader<impl std::io::Read>,
    id: u16,
    sent: u64,
    mut other: impl FnMut(&Payload),
) -> Count {
    let mut c = Count::default();
    while let Some(ev) = r.next_event() {
        match &ev.payload {
            Payload::Can(CanFrame::Data(d)) if d.id() == CanId::Standard(id) => {
                let n = u64::from_le_bytes(d.data().try_into().unwrap());
                if n < c.next {
                    c.out_of_order += 1;
                }
                c.missing += n.saturating_sub(c.next);
                c.next = n + 1;
            }
            p => other(p),
        }
    }
    c.missing += sent.saturating_sub(c.next);
    c
}
