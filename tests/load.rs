//! The serial load test: a USB-CAN adapter (a pseudo-terminal speaking the
//! ASCII serial-line CAN protocol) delivering ten times a saturated 1 Mbit/s
//! bus, 90 000 frames/s, for `TERMVEL_LOAD_SECS` seconds (default 60) into
//! `termvel live --headless`. Every frame carries a sequence number; the
//! test asserts that none is missing from the recording, that the sender
//! kept its rate (a pseudo-terminal blocks a writer whose reader lags, so a
//! slow termvel would show here as a slow sender), and that the snapshots
//! kept coming every 100 ms. Its own binary, so it has the machine to
//! itself; the figures go to stderr (`-- --nocapture`).
//!
//! The SocketCAN half of the load test runs in the VM (tests/socketcan-vm.sh).

#[path = "suite/pty.rs"]
mod pty;
#[path = "suite/sequence.rs"]
mod sequence;

use std::io::{BufRead, BufReader, Read};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use serde_json::Value;
use termvel::config::ConfigSet;
use termvel::decode::can::encode_signal;
use termvel::decode::slcan;
use termvel::event::{CanFrame, CanId, DataFrame, Payload};
use termvel::record::RecordingReader;

const RATE: u64 = 90_000;
const SEQ_ID: u16 = 0x5F0;

#[test]
fn an_adapter_at_ten_times_a_saturated_bus_loses_nothing() {
    let secs: u64 = std::env::var("TERMVEL_LOAD_SECS").ok().and_then(|s| s.parse().ok()).unwrap_or(60);
    let dir = tempfile::tempdir().unwrap();
    let mut adapter = pty::Pty::new();
    let mut child = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["live", "--serial"])
        .arg(format!("{},proto=slcan,bitrate=1000000,name=pt", adapter.path))
        .args(["--headless", "--every", "100ms", "--for"])
        .arg(format!("{}s", secs + 3))
        .arg("--record-dir")
        .arg(dir.path())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("termvel starts");
    let out = child.stdout.take().unwrap();
    let reader = std::thread::spawn(move || {
        BufReader::new(out).lines().map_while(Result::ok).map(|l| (Instant::now(), l)).collect::<Vec<_>>()
    });
    let mut err = child.stderr.take().unwrap();
    let err_reader = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = err.read_to_string(&mut s);
        s
    });
    // termvel opens the adapter's channel at 1 Mbit/s first.
    assert_eq!(adapter.read_until(b"O\r", Duration::from_secs(10)), b"C\rS8\rO\r");

    // The demo car's pt_state frame every 10 ms, so the engine has real
    // work; the rest are sequence-numbered frames.
    let cfg = ConfigSet::embedded();
    let pt = cfg.signals.messages.iter().find(|m| m.id == CanId::Standard(0x0C4)).unwrap();
    let mut pt_data = [0u8; 8];
    for s in &pt.signals {
        let v = match s.channel.as_str() {
            "vehicle.speed" => 250.0,
            "driver.throttle" => 100.0,
            "gearbox.gear" => 7.0,
            _ => 0.0,
        };
        encode_signal(s, v, &mut pt_data);
    }
    let pt_line =
        format!("{}\r", slcan::encode(&CanFrame::Data(DataFrame::new(pt.id, &pt_data).unwrap()), None).unwrap());

    let start = Instant::now();
    let end = start + Duration::from_secs(secs);
    let (mut seq, mut others) = (0u64, 0u64);
    let mut next_pt = start;
    let mut buf = String::with_capacity(64 * 1024);
    loop {
        let now = Instant::now();
        if now >= end {
            break;
        }
        let due = (now - start).as_nanos() as u64 * RATE / 1_000_000_000;
        buf.clear();
        while seq + others < due {
            if now >= next_pt {
                next_pt += Duration::from_millis(10);
                buf.push_str(&pt_line);
                others += 1;
            } else {
                sequence::push_slcan(&mut buf, SEQ_ID, seq);
                seq += 1;
            }
        }
        adapter.send(buf.as_bytes());
        std::thread::sleep(Duration::from_micros(500));
    }
    let elapsed = start.elapsed().as_secs_f64();
    let sent = seq + others;
    let rate = sent as f64 / elapsed;
    let status = child.wait().unwrap();
    let lines = reader.join().unwrap();
    let stderr = err_reader.join().unwrap();
    assert!(status.success(), "{stderr}");

    let rec = std::fs::read_dir(dir.path()).unwrap().next().unwrap().unwrap().path();
    let mut r = RecordingReader::open(&rec).unwrap();
    let mut pt_frames = 0u64;
    let count = sequence::count(&mut r, SEQ_ID, seq, |p| {
        if let Payload::Can(CanFrame::Data(d)) = p
            && d.id() == pt.id
        {
            pt_frames += 1;
        }
    });
    let (expect, missing) = (count.next, count.missing);
    assert_eq!(count.out_of_order, 0, "sequence frames out of order");
    let summary: Value = lines
        .iter()
        .rev()
        .find_map(|(_, l)| serde_json::from_str::<Value>(l).ok().filter(|v| v.get("summary").is_some()))
        .unwrap();
    let snaps: Vec<Instant> = lines
        .iter()
        .filter(|(t, l)| !l.starts_with("{\"summary\"") && *t >= start && *t <= end)
        .map(|(t, _)| *t)
        .collect();
    let max_gap = snaps.windows(2).map(|w| (w[1] - w[0]).as_secs_f64()).fold(0.0, f64::max);
    eprintln!(
        "load (serial, slcan): {sent} frames in {elapsed:.1} s = {rate:.0} frames/s; recorded {} + {pt_frames}, {missing} missing; \
         {} snapshots during the run, longest gap {max_gap:.3} s; termvel: {}",
        expect,
        snaps.len(),
        summary["live"]
    );
    assert_eq!(r.stats.malformed, 0);
    assert_eq!(missing, 0, "no frame missing from the recording");
    assert_eq!(pt_frames, others, "the speed frames too");
    assert!(rate >= 0.98 * RATE as f64, "the sender kept {RATE} frames/s, so termvel kept up: {rate:.0}");
    assert!(snaps.len() as u64 + 2 >= secs * 10, "snapshots kept their rate: {} in {secs} s", snaps.len());
    assert!(max_gap < 0.5, "no snapshot more than 0.5 s after the previous: {max_gap:.3} s");
    assert_eq!(summary["summary"]["parse_errors"], 0);
    assert!(summary["live"]["latency_us"]["p99"].as_u64().is_some(), "latency measured");
}
