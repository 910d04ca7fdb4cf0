//! termvel's `key=value` line telemetry: `lines::parse` on arbitrary bytes,
//! and on the same bytes with the CRC-8 after ` #` recomputed (so that
//! mutations reach the field parser). Checks: no panic; fields only on
//! success; accepted fields are well formed (keys of at most 64 bytes of
//! letters, digits, `_` and `.`, finite values, non-empty units); and the
//! fields, formatted again with `lines::format`, parse back to the same
//! fields (when the formatted line still fits).

#![no_main]

use libfuzzer_sys::fuzz_target;
use termvel::decode::lines::{self, Field, MAX_KEY, MAX_LINE};

fn check(line: &[u8]) {
    let mut out = vec![Field { key: "stale", unit: None, value: 0.0 }];
    match lines::parse(line, &mut out) {
        Err(e) => {
            assert!(out.is_empty(), "fields left after an error");
            let _ = e.to_string();
        }
        Ok(()) => {
            assert!(!out.is_empty());
            for f in &out {
                assert!(!f.key.is_empty() && f.key.len() <= MAX_KEY, "{f:?}");
                assert!(f.key.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'_' || b == b'.'), "{f:?}");
                assert!(f.key.split('.').all(|p| !p.is_empty()), "{f:?}");
                assert!(f.value.is_finite(), "{f:?}");
                assert!(f.unit.is_none_or(|u| !u.is_empty() && !u.contains([' ', '[', ']', '=', '#'])), "{f:?}");
            }
            let spec: Vec<(&str, Option<&str>, f64)> = out.iter().map(|f| (f.key, f.unit, f.value)).collect();
            let again = lines::format(&spec);
            if again.len() <= MAX_LINE {
                let mut back = Vec::new();
                lines::parse(again.as_bytes(), &mut back)
                    .unwrap_or_else(|e| panic!("{again:?} (formatted from {out:?}) does not parse: {e}"));
                assert_eq!(back, out, "format/parse round trip of {again:?}");
            }
        }
    }
}

fuzz_target!(|data: &[u8]| {
    check(data);
    // The same line with a correct checksum.
    if let Some(hash) = data.iter().position(|&c| c == b'#')
        && hash > 0
    {
        let body = &data[..hash - 1];
        let mut fixed = data[..hash + 1].to_vec();
        fixed.extend_from_slice(format!("{:02X}", lines::crc8(body)).as_bytes());
        if data.ends_with(b"\r") {
            fixed.push(b'\r');
        }
        check(&fixed);
    }
});
