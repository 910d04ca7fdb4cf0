//! Load and soak, in their own test binary so they have the machine to
//! themselves:
//!
//! - the screens up in a real terminal (tmux) while a USB-CAN adapter (a
//!   pseudo-terminal) delivers ten times a saturated 1 Mbit/s bus, 90 000
//!   frames/s, for `TERMVEL_SOAK_SECS` (default 60 s in CI; the full run is
//!   600 s): no frame missing from the recording, at least 15 frames a second
//!   drawn, memory flat (RSS sampled every 2 s, the curve printed);
//! - a long saturated-bus recording replayed as fast as possible,
//!   `TERMVEL_SOAK_REPLAY_S` seconds of stream (default 600; the full run is
//!   3600): memory flat and at most 64 MiB RSS.
//!
//! Full runs: `TERMVEL_SOAK_SECS=600 TERMVEL_SOAK_REPLAY_S=3600 cargo test
//! --release --test soak -- --nocapture --test-threads 1`.

#[path = "suite/pty.rs"]
mod pty;
#[path = "suite/sequence.rs"]
mod sequence;
#[path = "suite/tmux.rs"]
mod tmux;

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use termvel::record::RecordingReader;

fn env_secs(name: &str, default: u64) -> u64 {
    std::env::var(name).ok().and_then(|s| s.parse().ok()).unwrap_or(default)
}

/// Resident set size of `pid`, KiB.
fn rss_kib(pid: u32) -> Option<u64> {
    let s = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    s.lines().find_map(|l| l.strip_prefix("VmRSS:")).and_then(|v| v.split_whitespace().next()?.parse().ok())
}

/// Flat: the highest sample of the second half is within `slack_kib` of the
/// highest of the first half (after a warm-up).
fn flat(samples: &[u64], slack_kib: u64) -> bool {
    let n = samples.len();
    if n < 4 {
        return true;
    }
    let first = samples[n / 4..n / 2].iter().max().copied().unwrap_or(0);
    let second = samples[n / 2..].iter().max().copied().unwrap_or(0);
    second <= first + slack_kib
}

fn curve(samples: &[u64]) -> String {
    samples.iter().map(|k| format!("{:.1}", *k as f64 / 1024.0)).collect::<Vec<_>>().join(" ")
}

#[test]
fn the_screens_at_ten_times_a_saturated_bus() {
    const RATE: u64 = 90_000;
    let secs = env_secs("TERMVEL_SOAK_SECS", 60);
    let dir = tempfile::tempdir().unwrap();
    let mut adapter = pty::Pty::new();
    let cmd = format!(
        "{} live --serial {},proto=slcan,bitrate=1000000,name=pt --record-dir {} --verbose",
        env!("CARGO_BIN_EXE_termvel"),
        adapter.path,
        dir.path().display()
    );
    let t = tmux::Tmux::start("soak", &cmd, 160, 48);
    adapter.read_until(b"O\r", Duration::from_secs(15));
    let pid = t.pid();
    t.keys(&["4"]); // the feed screen: rates and latency
    let start = Instant::now();
    let end = start + Duration::from_secs(secs);
    let mut seq = 0u64;
    let mut buf = String::with_capacity(64 * 1024);
    let mut rss = Vec::new();
    let mut next_sample = start;
    loop {
        let now = Instant::now();
        if now >= end {
            break;
        }
        if now >= next_sample {
            rss.extend(rss_kib(pid));
            next_sample += Duration::from_secs(2);
        }
        let due = (now - start).as_nanos() as u64 * RATE / 1_000_000_000;
        buf.clear();
        while seq < due {
            sequence::push_slcan(&mut buf, 0x5F0, seq);
            seq += 1;
        }
        adapter.send(buf.as_bytes());
        std::thread::sleep(Duration::from_micros(500));
    }
    let elapsed = start.elapsed().as_secs_f64();
    let screen = t.screen();
    std::thread::sleep(Duration::from_millis(500));
    t.keys(&["q", "q"]);
    let end_screen = t.wait(20.0, "the exit", |s| s.contains("[exited"));
    assert!(end_screen.contains("[exited 0 ]"), "{end_screen}");
    // "termvel: screens drew N frames in T s (X per s; longest gap G ms)"
    let line = end_screen.lines().find(|l| l.contains("screens drew")).expect("the draw figures").to_string();
    let per_s: f64 =
        line.split('(').nth(1).and_then(|r| r.split_whitespace().next()).and_then(|x| x.parse().ok()).unwrap();
    let rec = std::fs::read_dir(dir.path()).unwrap().next().unwrap().unwrap().path();
    let mut r = RecordingReader::open(&rec).unwrap();
    let missing = sequence::count(&mut r, 0x5F0, seq, |_| {}).missing;
    let rate = seq as f64 / elapsed;
    eprintln!(
        "soak (screens, {secs} s): {seq} frames at {rate:.0}/s, {missing} missing; {line}; RSS MiB every 2 s: {}",
        curve(&rss)
    );
    eprintln!("the feed screen at the end of the load:\n{screen}");
    assert_eq!(missing, 0, "no frame missing from the recording");
    assert!(rate >= 0.98 * RATE as f64, "the sender kept its rate, so termvel kept up: {rate:.0}");
    assert!(per_s >= 15.0, "at least 15 frames a second: {line}");
    assert!(flat(&rss, 8 * 1024), "memory flat: {}", curve(&rss));
}

#[test]
fn a_long_replay_at_full_speed_stays_flat_and_under_64_mib() {
    let stream_s = env_secs("TERMVEL_SOAK_REPLAY_S", 600) as i64;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("long.tvrec");
    let events =
        termvel::sim::demo::write_saturated_recording(std::fs::File::create(&path).unwrap(), stream_s, 8_350).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["replay", path.to_str().unwrap(), "--headless", "--no-record"])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let pid = child.id();
    let start = Instant::now();
    let mut rss = Vec::new();
    while child.try_wait().unwrap().is_none() {
        rss.extend(rss_kib(pid));
        std::thread::sleep(Duration::from_millis(250));
    }
    let secs = start.elapsed().as_secs_f64();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let max = rss.iter().max().copied().unwrap_or(0);
    eprintln!(
        "soak (replay): {stream_s} s of stream, {events} events in {secs:.1} s; RSS MiB every 0.25 s: {}; max {:.1} MiB",
        curve(&rss),
        max as f64 / 1024.0
    );
    assert!(max <= 64 * 1024, "at most 64 MiB: {:.1} MiB", max as f64 / 1024.0);
    assert!(flat(&rss, 4 * 1024), "memory flat: {}", curve(&rss));
}
