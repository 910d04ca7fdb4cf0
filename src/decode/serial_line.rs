//! What one line from a serial port is, decided once, where the line is
//! read: a CAN frame from a serial CAN adapter (slcan), adapter chatter to
//! drop (acknowledgements, status replies), a bad adapter line with its
//! error, or an NMEA sentence or line-telemetry line that the engine's
//! [`Decoder`](super::Decoder) decodes into samples.
//!
//! Adapter lines are parsed here, before the event exists, because the
//! recording keeps a frame as a frame: what goes into the channel must
//! already be [`Payload::Can`]. A line that fails carries its error in
//! [`Payload::BadLine`], so the decoder counts it without parsing the bytes
//! again. NMEA and line telemetry stay [`Payload::Line`]: the recording
//! keeps them as text, and the decoder parses them once, into samples.

use super::slcan::{self, FrameSyntaxError, SlcanMsg};
use crate::event::{CanFrame, Payload, SourceKind};

/// What an adapter message is: a frame, `None` for protocol chatter, or why
/// it is not a valid message.
pub fn adapter_message(line: &[u8]) -> Result<Option<CanFrame>, FrameSyntaxError> {
    match slcan::parse(line)? {
        SlcanMsg::Frame { frame, .. } => Ok(Some(frame)),
        // Acknowledgements and status replies are protocol chatter.
        _ => Ok(None),
    }
}

/// The parse-error message counted against a source for a bad adapter
/// line, the same whether it was seen live or read back from a recording.
pub fn adapter_error(e: &FrameSyntaxError) -> String {
    format!("CAN adapter: {e}")
}

/// The payload of one line from a serial source of `kind` (a serial CAN
/// adapter's source is of kind [`SourceKind::Can`]), or `None` for a line
/// that is not an event.
pub fn payload_of(kind: SourceKind, line: &[u8]) -> Option<Payload> {
    match kind {
        SourceKind::Can => match adapter_message(line) {
            Ok(frame) => frame.map(Payload::Can),
            Err(e) => Some(Payload::BadLine { line: line.to_vec(), error: adapter_error(&e) }),
        },
        _ => Some(Payload::Line(line.to_vec())),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{CanId, DataFrame};

    #[test]
    fn adapter_lines_become_frames_chatter_or_bad_lines_with_their_error() {
        let frame = CanFrame::Data(DataFrame::new(CanId::Standard(0x123), &[0xAA, 0xBB]).unwrap());
        assert_eq!(payload_of(SourceKind::Can, b"t1232AABB"), Some(Payload::Can(frame)));
        assert_eq!(payload_of(SourceKind::Can, b""), None, "an acknowledgement is not an event");
        assert_eq!(payload_of(SourceKind::Can, b"F00"), None, "a status reply is not an event");
        assert_eq!(
            payload_of(SourceKind::Can, b"t12"),
            Some(Payload::BadLine {
                line: b"t12".to_vec(),
                error: "CAN adapter: column 4: expected 3 hex digits of a standard id".into()
            }),
            "a bad line keeps its bytes and the error of its one parse"
        );
    }

    #[test]
    fn sentences_and_telemetry_stay_lines_for_the_decoder() {
        // Not parsed here: a bad NMEA sentence is still a line, and the
        // decoder finds and counts its error when it decodes it.
        for kind in [SourceKind::Nmea, SourceKind::Lines] {
            assert_eq!(payload_of(kind, b"$GP"), Some(Payload::Line(b"$GP".to_vec())));
        }
    }
}
