//! The slcan (Lawicel) serial-line CAN protocol: `split_message` over the
//! whole input as an adapter's byte stream, and `parse` on every message
//! and on the input as one message. Checks: no panic; splitting always
//! makes progress; a parsed frame encodes (`encode`) to the message as it
//! came, up to the case of its hex digits, and that encoding parses back
//! to the same frame and timestamp.

#![no_main]

use libfuzzer_sys::fuzz_target;
use termvel::decode::slcan::{self, MAX_MESSAGE, SlcanMsg};

fn check(msg: &[u8]) {
    let result = slcan::parse(msg);
    let body = msg.strip_suffix(b"\r").unwrap_or(msg);
    match result {
        Ok(SlcanMsg::Frame { frame, adapter_time_ms }) => {
            assert!(body.len() <= MAX_MESSAGE);
            let s = slcan::encode(&frame, adapter_time_ms)
                .unwrap_or_else(|| panic!("parsed {frame:?} from {body:?} but cannot encode it"));
            // The canonical form is the message with upper-case hex.
            assert_eq!(s.as_bytes()[0], body[0], "frame letter");
            assert_eq!(s[1..].as_bytes(), body[1..].to_ascii_uppercase(), "encoding of {frame:?}");
            assert_eq!(slcan::parse(s.as_bytes()), Ok(SlcanMsg::Frame { frame, adapter_time_ms }));
        }
        Ok(SlcanMsg::Ack) => assert!(body.is_empty()),
        Ok(SlcanMsg::Nack) => assert_eq!(body, b"\x07"),
        Ok(SlcanMsg::Status(_)) => assert_eq!(body.len(), 3),
        Ok(SlcanMsg::Other(v)) => {
            assert_eq!(v, body);
            assert!(v[0].is_ascii_alphabetic() && v.iter().all(|b| (0x20..=0x7E).contains(b)));
        }
        Err(e) => {
            assert!(e.column >= 1 && e.column <= body.len().max(MAX_MESSAGE) + 1, "{e} in {body:?}");
            let _ = e.to_string();
        }
    }
}

fuzz_target!(|data: &[u8]| {
    let mut rest = data;
    while let Some((msg, n)) = slcan::split_message(rest) {
        assert!(n >= 1 && n <= rest.len(), "split took {n} of {}", rest.len());
        assert!(msg.len() <= n);
        assert_eq!(msg, &rest[..msg.len()]);
        check(msg);
        rest = &rest[n..];
    }
    assert!(!rest.contains(&b'\r') && !rest.contains(&0x07), "a complete message left unsplit");
    check(data);
});
