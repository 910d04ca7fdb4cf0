//! Prints every CAN frame termvel's `RecordingReader` reads from each file,
//! one JSON object per line, then one `{"summary": …}` line per file: the
//! termvel side of `tests/crosscheck_python_can.py`.
//!
//! `cargo run --release --example dump-frames -- FILE...`
//!
//! Frame keys: file, line, ordinal, t_ns, iface, kind (data, remote, error,
//! fd), id, extended, data (hex); dlc for remote frames, flags for FD frames.
//! An error frame's id is its class (the identifier without 0x20000000).
//! `line` is the 1-based line of a candump log the frame came from
//! (`RecordingReader::last_event_line`: frames may leave the reader's
//! time-order stage some lines after they were read). For recordings `line`
//! is null and `ordinal` (1-based, among all events) identifies the frame.

use std::io::Write;
use std::path::Path;
use std::process::ExitCode;

use serde_json::json;
use termvel::event::{CanFrame, Payload};
use termvel::record::RecordingReader;

fn hex(data: &[u8]) -> String {
    data.iter().map(|b| format!("{b:02X}")).collect()
}

fn main() -> ExitCode {
    let files: Vec<String> = std::env::args().skip(1).collect();
    if files.is_empty() {
        eprintln!("usage: dump-frames FILE...");
        return ExitCode::from(2);
    }
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    let mut failed = false;
    for file in &files {
        let mut reader = match RecordingReader::open(Path::new(file)) {
            Ok(r) => r,
            Err(e) => {
                eprintln!("dump-frames: {e}");
                let _ = writeln!(out, "{}", json!({"summary": {"file": file, "open_error": e.to_string()}}));
                failed = true;
                continue;
            }
        };
        let counts_lines = !reader.header.is_termvel;
        let mut ordinal: u64 = 0;
        while let Some(ev) = reader.next_event() {
            ordinal += 1;
            let Payload::Can(frame) = ev.payload else { continue };
            let line = counts_lines.then_some(reader.last_event_line());
            let iface = reader.header.sources.name(ev.source);
            let mut obj = json!({
                "file": file, "line": line, "ordinal": ordinal, "t_ns": ev.t_ns, "iface": iface,
            });
            let m = obj.as_object_mut().expect("an object");
            let (kind, id, extended) = match &frame {
                CanFrame::Data(f) => ("data", f.id().raw(), f.id().is_extended()),
                CanFrame::Remote(f) => {
                    m.insert("dlc".into(), json!(f.dlc()));
                    ("remote", f.id().raw(), f.id().is_extended())
                }
                CanFrame::Error(f) => ("error", f.class(), true),
                CanFrame::Fd(f) => {
                    m.insert("flags".into(), json!(f.flags()));
                    ("fd", f.id().raw(), f.id().is_extended())
                }
            };
            m.insert("kind".into(), json!(kind));
            m.insert("id".into(), json!(id));
            m.insert("extended".into(), json!(extended));
            m.insert("data".into(), json!(hex(frame.data())));
            let _ = writeln!(out, "{obj}");
        }
        let s = &reader.stats;
        let errors: Vec<_> = s.errors.iter().map(|e| json!([e.line, e.message])).collect();
        let summary = json!({"summary": {
            "file": file,
            "lines": s.lines,
            "events": s.events,
            "malformed": s.malformed,
            "errors": errors,
            "torn_tail": s.torn_tail.is_some(),
            "torn_tail_line": s.torn_tail.as_ref().map(|t| t.line),
        }});
        let _ = writeln!(out, "{summary}");
    }
    if out.flush().is_err() {
        return ExitCode::FAILURE;
    }
    if failed { ExitCode::FAILURE } else { ExitCode::SUCCESS }
}
