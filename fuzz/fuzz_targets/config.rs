//! The config loader: `detect_kind` and `validate_text` on arbitrary UTF-8
//! text (non-UTF-8 input is skipped: files are read as strings), for all
//! five kinds of file (vehicle, track, signals, alerts, plan), and the
//! locating helpers at arbitrary offsets. Checks: no panic; a file whose
//! kind cannot be read has `detect_kind`'s one error; a file with errors
//! yields no value; every error and warning is located on a line of the
//! text (or at line 0, the whole file) and formats; a valid vehicle's
//! full-load power can be evaluated.

#![no_main]

use libfuzzer_sys::fuzz_target;
use termvel::config::{ConfigError, Parsed, detect_kind, locate, validate_text};

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let lines = text.matches('\n').count() + 1;
    let located = |e: &ConfigError| {
        assert!(e.line <= lines, "{e} is past the last line ({lines})");
        assert!(e.line == 0 || e.column >= 1, "{e}");
        let _ = e.to_string();
    };

    // `validate_text` runs `detect_kind` first; a file without a kind
    // reports its one error from there.
    let report = validate_text("fuzz.toml", text);
    if report.kind.is_none() {
        assert_eq!(report.errors.len(), 1);
        assert_eq!(Some(&report.errors[0]), detect_kind("fuzz.toml", text).err().as_ref());
    }
    report.errors.iter().for_each(located);
    report.warnings.iter().for_each(located);
    if report.parsed.is_some() {
        assert!(report.errors.is_empty(), "a value despite errors");
    }
    if let Some(Parsed::Vehicle(v)) = &report.parsed {
        for speed in [0.0, 10.0, 50.0, 150.0, 1000.0] {
            let _ = v.full_load_power_w(speed);
        }
    }

    // The locating helpers at an offset the input picks (possibly inside a
    // multi-byte character) and past the end.
    let pick = data.first().map_or(0, |&b| usize::from(b) * text.len() / 255);
    for offset in [pick, text.len() + 5] {
        let (line, column) = locate::line_col(text, offset);
        assert!(line >= 1 && line <= lines && column >= 1);
        let _ = locate::key_path_at(text, offset);
    }
});
