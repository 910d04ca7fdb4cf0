//! Bad input everywhere: the corpus in tests/bad-input (malformed
//! recordings and candump logs: binary garbage, a header cut short, a giant
//! line, time going back, a huge timestamp, ids out of range, unknown event
//! kinds, bad escapes, NaN and infinity in line telemetry, an empty file;
//! and a raw NMEA stream with every kind of damage). Each must give a clear
//! message that says where and what, lose nothing that was good, and never
//! panic. (Malformed configs are in tests/configs/bad, see `config_errors`.)

use std::process::Command;
use std::time::Duration;

use crate::pty::Pty;
use crate::util::root;

/// Replays a corpus file headless; (exit code, stderr).
fn replay(file: &str) -> (Option<i32>, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["replay", &format!("tests/bad-input/{file}"), "--headless", "--no-record"])
        .current_dir(root())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert!(!err.contains("panicked"), "{file}: a panic:\n{err}");
    (o.status.code(), err)
}

#[test]
fn every_malformed_file_says_where_and_what() {
    // (file, exit status, what stderr must say)
    let cases: &[(&str, i32, &[&str])] = &[
        (
            "binary-garbage.tvrec",
            2,
            &[
                "binary-garbage.tvrec:1: skipped: expected '(' (CAN frame) or '[' (event) at the start",
                "more malformed lines",
                "the last line is torn",
                "no valid event in the file: not a termvel recording or candump log",
            ],
        ),
        ("empty.tvrec", 2, &["empty.tvrec: no valid event in the file"]),
        (
            "recording-header-cut.tvrec",
            2,
            &["recording-header-cut.tvrec:41: the embedded vehicle config ends after 32 of 52 lines"],
        ),
        ("recording-giant-line.tvrec", 0, &["recording-giant-line.tvrec:686: skipped: line longer than 65536 bytes"]),
        (
            "recording-huge-timestamp.tvrec",
            0,
            &[
                "recording-huge-timestamp.tvrec:736: skipped: CAN line: column 12: expected at most 10 digits of seconds",
            ],
        ),
        (
            "recording-ids-out-of-range.tvrec",
            0,
            &[
                "recording-ids-out-of-range.tvrec:636: skipped: CAN line: column 26: expected a standard id up to 7FF",
                "recording-ids-out-of-range.tvrec:646: skipped: CAN line: column 26: expected an extended id up to 1FFFFFFF",
            ],
        ),
        // One event stamped 2.3 years early between two that agree: an
        // isolated jump, applied at the time of the event before it.
        (
            "recording-time-backwards.tvrec",
            0,
            &[
                "recording-time-backwards.tvrec:706: one event's time jumps -73474130.279 s from both its neighbours (1 such in all); applied at the time of the event before it",
            ],
        ),
        (
            "recording-unknown-kind-bad-escape.tvrec",
            0,
            &[
                "recording-unknown-kind-bad-escape.tvrec:616: skipped: event line: unknown event kind \"telegram\"",
                "recording-unknown-kind-bad-escape.tvrec:617: skipped: event line: malformed \\x escape",
            ],
        ),
        (
            "lines-nan-and-inf.tvrec",
            0,
            &["2 bad lines from log (last: line telemetry: column 14: expected a finite number (not nan or inf))"],
        ),
        (
            "candump-mixed-garbage.log",
            0,
            &[
                "candump-mixed-garbage.log:11: skipped: expected '(' (CAN frame) or '[' (event) at the start, found \"this is not a candump line\"",
                "candump-mixed-garbage.log:21: skipped: CAN line: column 33: expected two hex digits per data byte",
                "candump-mixed-garbage.log:31: skipped: CAN line: column 32: expected a CAN FD length",
                "candump-mixed-garbage.log:41: skipped: CAN line: column 46: expected at most 8 data bytes in a classic frame",
            ],
        ),
    ];
    let mut failures = Vec::new();
    for (file, code, says) in cases {
        let (got, err) = replay(file);
        if got != Some(*code) {
            failures.push(format!("{file}: exit {got:?}, expected {code}\n{err}"));
        }
        for s in *says {
            if !err.contains(s) {
                failures.push(format!("{file}: stderr lacks {s:?}\n{err}"));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n---\n"));
    // The corpus is all exercised here.
    let files = std::fs::read_dir(root().join("tests/bad-input")).unwrap().count();
    assert_eq!(files, cases.len() + 1, "every file has a case (plus nmea-stream.bin below)");
}

#[test]
fn good_events_around_the_damage_are_kept() {
    // The giant line sits between two runs of good events: both replay.
    let o = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["replay", "tests/bad-input/recording-giant-line.tvrec", "--headless", "--no-record"])
        .current_dir(root())
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    let summary: serde_json::Value = serde_json::from_str(out.lines().last().unwrap()).unwrap();
    assert_eq!(summary["summary"]["events"], 200, "100 events before the giant line and 100 after: {summary}");
    assert_eq!(summary["summary"]["malformed_lines"], 1);
}

#[test]
fn a_damaged_nmea_stream_counts_each_bad_sentence_and_keeps_the_good() {
    let mut gnss = Pty::new();
    let child = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["live", "--serial"])
        .arg(format!("{},proto=nmea,name=gnss", gnss.path))
        .args(["--headless", "--for", "2500ms", "--no-record"])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(700));
    let stream = std::fs::read(root().join("tests/bad-input/nmea-stream.bin")).unwrap();
    for piece in stream.split_inclusive(|b| *b == b'\n') {
        gnss.send(piece);
        std::thread::sleep(Duration::from_millis(40));
    }
    let o = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success() && !err.contains("panicked"), "{err}");
    let lines: Vec<serde_json::Value> =
        String::from_utf8_lossy(&o.stdout).lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    let (summary, snaps) = lines.split_last().unwrap();
    // Bad: a wrong checksum, no checksum, a cut sentence, the binary run
    // (two lines: it holds a line feed), the 10 kB line (cut into three at
    // the 4096-byte line limit), NaN speed, latitude out of range, infinite
    // speed. Good: the first and the last sentence.
    assert_eq!(summary["summary"]["parse_errors"], 11, "{summary}");
    let last = snaps.iter().rev().find(|s| s["channels"].get("gnss.speed").is_some()).unwrap();
    let kn = last["channels"]["gnss.speed"]["value"].as_f64().unwrap() * 3600.0 / 1852.0;
    assert!((kn - 101.0).abs() < 1e-9, "the last good sentence: {kn} kn");
    let min_kn = last["channels"]["gnss.speed"]["min"].as_f64().unwrap() * 3600.0 / 1852.0;
    assert!((min_kn - 100.0).abs() < 1e-9, "NaN and infinity never got in: {min_kn}");
    assert_eq!(last["channels"]["gnss.lat"]["max"], 46.81234, "the latitude out of range never got in");
    let alert =
        last["alerts"].as_array().unwrap().iter().find(|a| a["key"] == "parse:gnss").expect("the bad-lines alert");
    assert!(alert["message"].as_str().unwrap().contains("11 bad lines (NMEA: VTG field 5:"), "{alert}");
}
