//! The recording format from the outside: what a crash, a disk error or a
//! careless edit does to a file, and what the reader makes of it.

use std::io::Write;

use termvel::event::{
    CanFrame, CanId, DataFrame, ErrorFrame, Event, FdFrame, LinkState, OPERATOR, Payload, RemoteFrame, SESSION,
    SourceKind, SourceTable,
};
use termvel::record::{Header, RecordingError, RecordingReader, RecordingWriter, VERSION};

use crate::util::{demo, write};

fn read_all(bytes: &[u8]) -> (Vec<Event>, RecordingReader<&[u8]>) {
    let mut r = RecordingReader::new(bytes, "test.tvrec").expect("header reads");
    let mut evs = Vec::new();
    while let Some(e) = r.next_event() {
        evs.push(e);
    }
    (evs, r)
}

#[test]
fn every_payload_round_trips() {
    let mut sources = SourceTable::default();
    let can = sources.intern("can0", SourceKind::Can);
    let gnss = sources.intern("gnss0", SourceKind::Nmea);
    let cfg = termvel::config::ConfigSet::embedded();
    let header = Header {
        version: VERSION,
        created: Some("x".into()),
        sources: sources.clone(),
        configs: cfg.texts.clone(),
        is_termvel: true,
    };
    let id = CanId::Standard(0x123);
    let events = vec![
        Event::new(1_000_000_000, can, Payload::Can(CanFrame::Data(DataFrame::new(id, &[1, 2, 3]).unwrap()))),
        Event::new(
            1_000_000_001,
            can,
            Payload::Can(CanFrame::Remote(RemoteFrame::new(CanId::Extended(0x1ABCDEF), 8).unwrap())),
        ),
        Event::new(1_000_001_000, can, Payload::Can(CanFrame::Error(ErrorFrame::new(0x40, &[0; 8]).unwrap()))),
        Event::new(1_000_002_000, can, Payload::Can(CanFrame::Fd(FdFrame::new(id, 1, &[7; 48]).unwrap()))),
        Event::new(1_000_003_000, gnss, Payload::Line(b"$GPRMC,1*00 with \\ and \x01 and \xff".to_vec())),
        Event::new(1_000_004_000, OPERATOR, Payload::Mark("boost on at the 2 km board, 5 °C colder".into())),
        Event::new(1_000_005_000, OPERATOR, Payload::Ack("stale:weather".into())),
        Event::new(1_000_006_000, gnss, Payload::Link(LinkState::Down, "device vanished".into())),
        Event::new(1_000_007_000, SESSION, Payload::Tick),
        Event::new(1_000_007_500, can, Payload::Lost(212_618)),
        Event::new(1_000_008_000, SESSION, Payload::Note("alert raise caution x: y".into())),
    ];
    let mut buf = Vec::new();
    {
        let mut w = RecordingWriter::new(&mut buf, &header).unwrap();
        for e in &events {
            w.write_event(e, &sources).unwrap();
        }
    }
    let (back, r) = read_all(&buf);
    assert_eq!(back, events);
    assert_eq!(r.stats.malformed, 0);
    assert_eq!(r.header.configs, cfg.texts, "the configuration is embedded verbatim");
    assert_eq!(r.header.sources, sources);
    // CAN lines are candump lines: a simple filter gives a candump log.
    let text = String::from_utf8_lossy(&buf);
    let can_lines: Vec<&str> = text.lines().filter(|l| l.starts_with('(')).collect();
    assert_eq!(can_lines[0], "(1.000000) can0 123#010203");
    assert_eq!(can_lines[1], "(1.000000001) can0 01ABCDEF#R8", "nine digits when a time is not whole microseconds");
    assert_eq!(can_lines.len(), 4);
    for l in can_lines {
        termvel::decode::candump::parse_line(l.as_bytes()).unwrap();
    }
}

#[test]
fn a_torn_tail_replays_everything_before_it() {
    let full = std::fs::read(demo()).unwrap();
    let (all, r) = read_all(&full);
    assert!(r.stats.torn_tail.is_none());
    let total_lines = full.iter().filter(|b| **b == b'\n').count() as u64;
    // Cut the file in the middle of a line, at several places.
    for frac in [0.31, 0.5, 0.77, 0.999] {
        let mut cut = (full.len() as f64 * frac) as usize;
        while full[cut - 1] == b'\n' {
            cut += 1;
        }
        let (evs, r) = read_all(&full[..cut]);
        let torn = r.stats.torn_tail.clone().expect("torn tail reported");
        let whole_lines = full[..cut].iter().filter(|b| **b == b'\n').count() as u64;
        assert_eq!(torn.line, whole_lines + 1, "the torn line is the one after the last whole line");
        assert!(torn.line <= total_lines);
        assert_eq!(evs[..], all[..evs.len()], "everything before the tear replays unchanged");
        assert_eq!(r.stats.malformed, 0, "a torn tail is not a malformed line");
        // Everything up to the last complete line is there.
        let header_lines = full.split(|b| *b == b'\n').position(|l| l == b"%end-header").unwrap() as u64 + 1;
        assert_eq!(evs.len() as u64, whole_lines - header_lines);
    }
}

#[test]
fn a_cut_header_is_refused_with_its_line() {
    let full = std::fs::read(demo()).unwrap();
    let cut = full.windows(12).position(|w| w == b"%end-header\n").unwrap() - 40;
    match RecordingReader::new(&full[..cut], "cut.tvrec") {
        Err(RecordingError::Header { path, line, message }) => {
            assert_eq!(path, "cut.tvrec");
            assert!(line > 1);
            assert!(message.contains("the header ends") || message.contains("config ends"), "{message}");
        }
        Err(e) => panic!("wrong error: {e}"),
        Ok(_) => panic!("a cut header must be refused"),
    }
}

#[test]
fn malformed_lines_are_counted_located_and_skipped() {
    let full = std::fs::read_to_string(demo()).unwrap();
    let (clean, _) = read_all(full.as_bytes());
    let lines: Vec<&str> = full.lines().collect();
    let body = lines.iter().position(|l| *l == "%end-header").unwrap() + 1;
    let mut damaged = String::new();
    let mut bad_at = Vec::new();
    for (i, l) in lines.iter().enumerate() {
        damaged.push_str(l);
        damaged.push('\n');
        if i >= body && i % 5000 == 0 {
            let junk = ["(17.0 can0 0C4#00", "garbage \u{1} line", "[1.0] nowhere line x", "(1.0) can0 0C4#123"]
                [bad_at.len() % 4];
            damaged.push_str(junk);
            damaged.push('\n');
            bad_at.push(i as u64 + 2 + bad_at.len() as u64);
        }
    }
    damaged.push_str(&"x".repeat(70_000));
    damaged.push('\n');
    let (evs, r) = read_all(damaged.as_bytes());
    assert_eq!(evs, clean, "the good lines replay exactly as before");
    assert_eq!(r.stats.malformed, bad_at.len() as u64 + 1);
    let lines_reported: Vec<u64> = r.stats.errors.iter().map(|e| e.line).collect();
    assert_eq!(&lines_reported[..bad_at.len()], &bad_at[..], "each bad line is located");
    assert!(r.stats.errors.last().unwrap().message.contains("longer than"));
    assert!(r.stats.errors[1].message.contains("expected"), "{}", r.stats.errors[1].message);
}

#[test]
fn the_bundled_demo_is_regenerated_byte_for_byte() {
    // The demo recording is the simulator's output for the embedded plan and
    // seed; if this fails, the simulator, the plan or the config changed:
    // regenerate with `cargo run --release --example make-demo`.
    let mut fresh = Vec::new();
    termvel::sim::demo::write_demo_recording(&mut fresh).unwrap();
    let bundled = std::fs::read(demo()).unwrap();
    assert!(fresh == bundled, "replays/demo.tvrec is stale: run `cargo run --release --example make-demo`");
}

#[test]
fn marks_are_on_disk_at_once_and_the_rest_within_100_ms_of_stream() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("flush.tvrec");
    let mut sources = SourceTable::default();
    let can = sources.intern("can0", SourceKind::Can);
    let header = Header { version: VERSION, sources: sources.clone(), is_termvel: true, ..Header::default() };
    let mut w = RecordingWriter::new(std::fs::File::create(&path).unwrap(), &header).unwrap();
    let frame = |t| Event::new(t, can, Payload::Can(CanFrame::Data(DataFrame::new(CanId::Standard(1), &[1]).unwrap())));
    let on_disk = || {
        let bytes = std::fs::read(&path).unwrap();
        read_all(&bytes).0.len()
    };
    w.write_event(&frame(1_000_000_000), &sources).unwrap();
    let after_first = on_disk();
    for k in 1..5 {
        w.write_event(&frame(1_000_000_000 + k * 10_000_000), &sources).unwrap();
    }
    assert_eq!(on_disk(), after_first, "within 100 ms of stream time the writer may hold events");
    w.write_event(&Event::new(1_000_050_000, OPERATOR, Payload::Mark("now".into())), &sources).unwrap();
    assert_eq!(on_disk(), 6, "a mark flushes everything before it, and itself");
    w.write_event(&frame(1_060_000_000), &sources).unwrap();
    w.write_event(&frame(1_150_000_001), &sources).unwrap();
    assert_eq!(on_disk(), 8, "100 ms of stream time after the last flush, everything is on disk");
}

#[test]
fn a_plain_candump_log_reads_with_its_interfaces_as_sources() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "x.log",
        "(1436509052.249713) can0 044#2A366C2BBA\n(1436509052.249800) vcan1 00000123#R\n(1436509052.250000) can0 123##1112233\n",
    );
    let mut r = RecordingReader::open(&p).unwrap();
    assert!(!r.header.is_termvel);
    let mut n = 0;
    while let Some(e) = r.next_event() {
        n += 1;
        assert!(matches!(e.payload, Payload::Can(_)));
    }
    assert_eq!(n, 3);
    assert_eq!(r.header.sources.find("vcan1").map(|s| r.header.sources.get(s).unwrap().kind), Some(SourceKind::Can));
    let mut f = std::fs::OpenOptions::new().append(true).open(&p).unwrap();
    f.write_all(b"(1436509052.250100) can0 7FF#00").unwrap();
    let mut r = RecordingReader::open(&p).unwrap();
    r.drain();
    assert_eq!(r.stats.torn_tail.as_ref().map(|t| t.line), Some(4));
}

/// Frames the kernel dropped (`lost N`) raise an alert on replay, with the
/// count, and it clears five seconds after the last loss.
#[test]
fn lost_frames_in_a_recording_raise_an_alert() {
    let dir = tempfile::tempdir().unwrap();
    let mut sources = SourceTable::default();
    let can = sources.intern("can0", SourceKind::Can);
    let cfg = termvel::config::ConfigSet::embedded();
    let (mut w, path) = termvel::record::create_recording(dir.path(), "test", &cfg, &sources).unwrap();
    let t0 = 1_800_000_000_000_000_000i64;
    let frame = |t: i64| {
        Event::new(t, can, Payload::Can(CanFrame::Data(DataFrame::new(CanId::Standard(0x5F0), &[1]).unwrap())))
    };
    for k in 0..100 {
        w.write_event(&frame(t0 + k * 100_000_000), &sources).unwrap();
        if k == 20 {
            w.write_event(&Event::new(t0 + 2_050_000_000, can, Payload::Lost(1234)), &sources).unwrap();
            w.write_event(&Event::new(t0 + 2_060_000_000, can, Payload::Lost(66)), &sources).unwrap();
        }
    }
    drop(w);
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["replay", path.to_str().unwrap(), "--headless", "--no-record", "--every", "500ms"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let snaps: Vec<serde_json::Value> =
        String::from_utf8_lossy(&out.stdout).lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    let lost = |s: &serde_json::Value| {
        s["alerts"].as_array().and_then(|a| a.iter().find(|a| a["key"] == "lost:can0")).cloned()
    };
    let at =
        |secs: f64| snaps.iter().find(|s| s["t_ns"].as_i64().is_some_and(|t| t >= t0 + (secs * 1e9) as i64)).unwrap();
    assert!(lost(at(2.0)).is_none(), "nothing lost yet");
    let a = lost(at(2.5)).expect("raised after the loss");
    assert_eq!(a["active"], true);
    assert!(a["message"].as_str().unwrap().contains("1300 frames lost"), "{a}");
    assert_eq!(lost(at(8.0)).expect("kept until acknowledged")["active"], false, "cleared 5 s after the last loss");
}

// Issue 13, item 7: the source table numbered a candump log's interfaces
// with `as u16`, so the 65 537th name took the operator's id (0).
#[test]
fn a_candump_log_naming_more_interfaces_than_ids_skips_the_extra_lines_and_says_why() {
    let room = termvel::event::MAX_SOURCES - SourceTable::default().len();
    let mut log = String::new();
    for i in 0..room + 3 {
        log.push_str(&format!("(1773474133.{:06}) c{i} 0C4#01\n", i % 1_000_000));
    }
    let (evs, r) = read_all(log.as_bytes());
    assert_eq!(evs.len(), room, "every interface that fits is read");
    assert_eq!(r.stats.malformed, 3, "the three past the limit are counted");
    let first = &r.stats.errors[0];
    assert_eq!(first.line, room as u64 + 1);
    assert!(first.message.contains("the source table is full (65536 sources)"), "{}", first.message);
    assert!(evs.iter().all(|e| e.source != OPERATOR && e.source != SESSION), "no id is reused");
    assert_eq!(r.header.sources.name(OPERATOR), "op");
}
