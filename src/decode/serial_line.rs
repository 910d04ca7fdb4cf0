//! What one line from a serial port is, decided once, where the line is
//! read: a CAN frame from a serial CAN adapter (slcan), an adapter reply
//! (acknowledgement, refusal, status, version, serial number: recorded as a
//! line, counted as a reply), a bad adapter line with its error, or an NMEA
//! sentence or line-telemetry line that the engine's
//! [`Decoder`](super::Decoder) decodes into samples. Nothing read from the
//! wire is dropped here: every line becomes an event.
//!
//! Adapter lines are parsed here, before the event exists, because the
//! recording keeps a frame as a frame: what goes into the channel must
//! already be [`Payload::Can`]. A line that fails carries its error in
//! [`Payload::BadLine`], so the decoder counts it without parsing the bytes
//! again. NMEA and line telemetry stay [`Payload::Line`]: the recording
//! keeps them as text, and the decoder parses them once, into samples.

use super::slcan::{self, FrameSyntaxError, SlcanMsg};
use crate::event::{CanFrame, Payload, SourceKind};

/// What an adapter message is: a frame, `None` for a reply (acknowledgement,
/// refusal, status, version, serial number), or why it is not a valid
/// message.
pub fn adapter_message(line: &[u8]) -> Result<Option<CanFrame>, FrameSyntaxError> {
    match slcan::parse(line)? {
        SlcanMsg::Frame { frame, .. } => Ok(Some(frame)),
        // Replies: the decoder counts them.
        _ => Ok(None),
    }
}

/// The parse-error message counted against a source for a bad adapter
/// line, the same whether it was seen live or read back from a recording.
pub fn adapter_error(e: &FrameSyntaxError) -> String {
    format!("CAN adapter: {e}")
}

/// The payload of one line from a serial source of `kind` (a serial CAN
/// adapter's source is of kind [`SourceKind::Can`]). An adapter's reply
/// stays a line: recorded as it came, counted as a reply by the decoder
/// (live and in a replay alike).
pub fn payload_of(kind: SourceKind, line: &[u8]) -> Payload {
    match kind {
        SourceKind::Can => match adapter_message(line) {
            Ok(Some(frame)) => Payload::Can(frame),
            Ok(None) => Payload::Line(line.to_vec()),
            Err(e) => Payload::BadLine { line: line.to_vec(), error: adapter_error(&e) },
        },
        _ => Payload::Line(line.to_vec()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{CanId, DataFrame};

    #[test]
    fn adapter_lines_become_frames_chatter_or_bad_lines_with_their_error() {
        let frame = CanFrame::Data(DataFrame::new(CanId::Standard(0x123), &[0xAA, 0xBB]).unwrap());
        assert_eq!(payload_of(SourceKind::Can, b"t1232AABB"), Payload::Can(frame));
        // Issue 13, item 5: replies were dropped before they became events.
        for reply in [&b""[..], b"\x07", b"F00", b"V1013", b"v0101", b"NA123", b"z"] {
            assert_eq!(payload_of(SourceKind::Can, reply), Payload::Line(reply.to_vec()), "a reply is kept");
        }
        assert_eq!(
            payload_of(SourceKind::Can, b"t12"),
            Payload::BadLine {
                line: b"t12".to_vec(),
                error: "CAN adapter: column 4: expected 3 hex digits of a standard id".into()
            },
            "a bad line keeps its bytes and the error of its one parse"
        );
        assert!(matches!(payload_of(SourceKind::Can, b"hello world"), Payload::BadLine { .. }));
    }

    #[test]
    fn sentences_and_telemetry_stay_lines_for_the_decoder() {
        // Not parsed here: a bad NMEA sentence is still a line, and the
        // decoder finds and counts its error when it decodes it.
        for kind in [SourceKind::Nmea, SourceKind::Lines] {
            assert_eq!(payload_of(kind, b"$GP"), Payload::Line(b"$GP".to_vec()));
        }
    }
}
