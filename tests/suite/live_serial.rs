//! `termvel live` on real serial ports: pseudo-terminal pairs stand in for a
//! GNSS receiver, a USB-CAN adapter and a small logger. The test writes into
//! the master side as the devices would, garbage included, and checks what
//! termvel decoded, counted, recorded, and how it replays.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use termvel::config::ConfigSet;
use termvel::decode::can::encode_signal;
use termvel::decode::{lines, nmea, slcan};
use termvel::event::{CanFrame, CanId, DataFrame};

use crate::pty::Pty;
use crate::util::root;

/// The demo car's pt_state frame (0x0C4) with a speed in km/h.
pub(crate) fn speed_frame(kmh: f64) -> CanFrame {
    let cfg = ConfigSet::embedded();
    let m = cfg.signals.messages.iter().find(|m| m.id == CanId::Standard(0x0C4)).unwrap();
    let mut data = [0u8; 8];
    for s in &m.signals {
        let v = match s.channel.as_str() {
            "vehicle.speed" => kmh,
            "driver.throttle" => 100.0,
            "gearbox.gear" => 6.0,
            _ => 0.0,
        };
        encode_signal(s, v, &mut data);
    }
    CanFrame::Data(DataFrame::new(m.id, &data).unwrap())
}

fn spawn_live(args: &[String]) -> Child {
    Command::new(env!("CARGO_BIN_EXE_termvel"))
        .arg("live")
        .args(args)
        .current_dir(root())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("termvel starts")
}

fn recording_in(dir: &Path) -> PathBuf {
    let r: Vec<PathBuf> = std::fs::read_dir(dir).unwrap().map(|e| e.unwrap().path()).collect();
    assert_eq!(r.len(), 1, "one recording: {r:?}");
    r[0].clone()
}

#[test]
fn three_serial_protocols_at_once() {
    let dir = tempfile::tempdir().unwrap();
    let (mut gnss, mut adapter, mut logger) = (Pty::new(), Pty::new(), Pty::new());
    let (gnss_path, adapter_path, logger_path) = (gnss.path.clone(), adapter.path.clone(), logger.path.clone());
    let child = spawn_live(&[
        "--serial".into(),
        format!("{gnss_path},proto=nmea,name=gnss"),
        "--serial".into(),
        format!("{adapter_path},proto=slcan,bitrate=500000,name=pt"),
        "--serial".into(),
        format!("{logger_path},proto=lines,baud=57600,name=log"),
        "--headless".into(),
        "--every".into(),
        "500ms".into(),
        // Long enough for every line below on a busy machine (the session's
        // time counts from its start, before the adapter is even opened).
        "--for".into(),
        "6s".into(),
        "--record-dir".into(),
        dir.path().display().to_string(),
    ]);
    // The adapter is told to open its channel at 500 kbit/s: close, S6, open.
    let got = adapter.read_until(b"O\r", Duration::from_secs(10));
    assert_eq!(got, b"C\rS6\rO\r", "close, 500 kbit/s, open");
    std::thread::sleep(Duration::from_millis(300));
    for k in 0..15 {
        let rmc =
            nmea::sentence(&format!("GPRMC,0742{:02}.00,A,4648.7404,N,07124.1278,E,100.000,84.0,140326,,,A", 10 + k));
        gnss.send(format!("{rmc}\r\n").as_bytes());
        let frame = slcan::encode(&speed_frame(250.0), Some(k as u16 * 100)).unwrap();
        adapter.send(format!("{frame}\r").as_bytes());
        logger.send(
            format!("{}\n", lines::format(&[("coolant.temp", None, 95.5), ("boost.duty", Some("%"), 40.0)])).as_bytes(),
        );
        if k == 7 {
            // One bad line each: a checksum that does not match, a frame
            // cut short, a corrupted logger line.
            gnss.send(b"$GPRMC,074217.00,A,4648.7404,N,07124.1278,E,100.000,84.0,140326,,,A*00\r\n");
            adapter.send(b"t0C\r");
            logger.send(b"coolant.temp=95.5 #00\n");
            // And line noise, as a receiver gives while it powers up.
            gnss.send(b"\xff\x00\x13\xfe$G\x80\r\n");
        }
        if k == 9 {
            // A line torn across two writes arrives whole.
            let rmc = nmea::sentence("GPRMC,074219.50,A,4648.7404,N,07124.1278,E,100.000,84.0,140326,,,A");
            let (x, y) = rmc.split_at(20);
            gnss.send(x.as_bytes());
            std::thread::sleep(Duration::from_millis(30));
            gnss.send(format!("{y}\r\n").as_bytes());
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    let out = child.wait_with_output().unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    let lines_out: Vec<serde_json::Value> = stdout.lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    let (summary, snaps) = lines_out.split_last().unwrap();
    // The last snapshot that has seen the traffic.
    let s = snaps.iter().rev().find(|s| s["channels"].get("coolant.temp").is_some()).expect("values decoded");
    let v = |c: &str| s["channels"][c]["value"].as_f64().unwrap_or(f64::NAN);
    assert!((v("gnss.speed") - 100.0 * 1852.0 / 3600.0).abs() < 1e-6, "100 kn: {}", v("gnss.speed"));
    assert!((v("vehicle.speed") - 250.0 / 3.6).abs() < 0.01, "250 km/h: {}", v("vehicle.speed"));
    assert_eq!(v("coolant.temp"), 95.5);
    assert!((v("boost.duty") - 0.40).abs() < 1e-12, "40 % is 0.40");
    assert_eq!(summary["summary"]["parse_errors"], 4, "one bad line per source and the noise: {summary}");
    // Issue 13, item 13: the live summary said `"snapshots": 0` after
    // printing them.
    assert_eq!(summary["summary"]["snapshots"], snaps.len() as u64, "{summary}");
    // Each source reported its bad line on its own.
    let last = snaps.last().unwrap();
    let alerts: Vec<&str> = last["alerts"].as_array().unwrap().iter().map(|a| a["key"].as_str().unwrap()).collect();
    for k in ["parse:gnss", "parse:pt", "parse:log"] {
        assert!(alerts.contains(&k), "{k} in {alerts:?}");
    }
    // The recording: adapter frames as candump lines under the source's
    // name, serial lines as they came, the bad ones too.
    let rec = recording_in(dir.path());
    let text = std::fs::read_to_string(&rec).unwrap();
    assert_eq!(text.lines().filter(|l| l.starts_with('(') && l.contains(" pt 0C4#")).count(), 15);
    assert!(text.contains("] pt line t0C\n"), "the bad adapter line is kept");
    assert!(text.contains("] gnss line $GPRMC,074217.00") && text.contains("*00\n"));
    assert!(text.contains("] log line coolant.temp=95.5 #00\n"));
    assert!(text.contains(" session tick\n"));
    // The recording replays to exactly the snapshots printed live.
    let replay = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["replay", rec.to_str().unwrap(), "--headless", "--no-record", "--every", "500ms"])
        .output()
        .unwrap();
    assert!(replay.status.success());
    // Everything but the closing summary line (the live one adds latency
    // and processor time).
    let strip = |s: &str| s.lines().filter(|l| !l.contains("\"summary\":{")).map(str::to_owned).collect::<Vec<_>>();
    let replayed = String::from_utf8_lossy(&replay.stdout);
    assert_eq!(strip(&replayed), strip(&stdout), "live and its replay agree, snapshot for snapshot");
}

#[test]
fn a_device_that_vanishes_is_down_within_a_second_and_reopened() {
    let dir = tempfile::tempdir().unwrap();
    let link = dir.path().join("gnss-device");
    let master = Pty::new();
    std::os::unix::fs::symlink(&master.path, &link).unwrap();
    let rec_dir = dir.path().join("rec");
    std::fs::create_dir(&rec_dir).unwrap();
    let child = spawn_live(&[
        "--serial".into(),
        format!("{},proto=nmea", link.display()),
        "--headless".into(),
        "--for".into(),
        "5s".into(),
        "--record-dir".into(),
        rec_dir.display().to_string(),
    ]);
    let sentence = |k: u32| {
        format!(
            "{}\r\n",
            nmea::sentence(&format!("GPRMC,0742{:02}.00,A,4648.7404,N,07124.1278,E,50.000,84.0,140326,,,A", k % 60))
        )
    };
    let mut master = master;
    std::thread::sleep(Duration::from_millis(700));
    for k in 0..8 {
        master.send(sentence(k).as_bytes());
        std::thread::sleep(Duration::from_millis(100));
    }
    // Unplug: the device (master) closes and its path goes away.
    drop(master);
    std::fs::remove_file(&link).unwrap();
    let unplugged_at = std::time::SystemTime::now();
    std::thread::sleep(Duration::from_millis(1200));
    // Plug it back in: a new device at the same path.
    let mut master2 = Pty::new();
    std::os::unix::fs::symlink(&master2.path, &link).unwrap();
    std::thread::sleep(Duration::from_millis(2500));
    for k in 20..25 {
        master2.send(sentence(k).as_bytes());
        std::thread::sleep(Duration::from_millis(100));
    }
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = std::fs::read_to_string(recording_in(&rec_dir)).unwrap();
    let link_lines: Vec<&str> = text.lines().filter(|l| l.contains(" gnss0 link ")).collect();
    let states: Vec<&str> = link_lines.iter().map(|l| l.split(' ').nth(3).unwrap()).collect();
    assert!(states.starts_with(&["up", "down"]), "{link_lines:?}");
    assert_eq!(states.last(), Some(&"up"), "reopened: {link_lines:?}");
    // Down within a second of the unplug.
    let down = link_lines.iter().find(|l| l.contains(" link down ")).unwrap();
    let t: f64 = down[1..down.find(']').unwrap()].parse().unwrap();
    let unplug = unplugged_at.duration_since(std::time::UNIX_EPOCH).unwrap().as_secs_f64();
    assert!(t - unplug < 1.0, "down {:.3} s after the unplug", t - unplug);
    // Data from before and after the outage is in the recording.
    assert!(text.contains("GPRMC,074207.00") && text.contains("GPRMC,074224.00"));
    // The alert was raised and cleared.
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("\"key\":\"down:gnss0\""), "the down alert was shown");
}

/// The README's two example senders of the line telemetry protocol, run as
/// written: what they print is the README's example line, and termvel
/// accepts it.
#[test]
fn the_readme_senders_print_lines_termvel_accepts() {
    let readme = std::fs::read_to_string(root().join("README.md")).unwrap();
    let section = &readme[readme.find("### The line telemetry protocol").expect("the section")..];
    let block = |lang: &str| {
        let start = section.find(&format!("```{lang}\n")).unwrap_or_else(|| panic!("a {lang} block")) + lang.len() + 4;
        section[start..start + section[start..].find("```").unwrap()].to_string()
    };
    let example = block("text").trim().to_string();
    let dir = tempfile::tempdir().unwrap();
    let py = dir.path().join("sender.py");
    std::fs::write(&py, block("python")).unwrap();
    let out = Command::new("python3").arg(&py).output().expect("python3 runs");
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let from_python = String::from_utf8(out.stdout).unwrap();
    let c = dir.path().join("sender.c");
    std::fs::write(&c, block("c")).unwrap();
    let exe = dir.path().join("sender");
    let cc = Command::new("cc")
        .args(["-std=c99", "-Wall", "-Werror", "-o"])
        .arg(&exe)
        .arg(&c)
        .output()
        .expect("a C compiler");
    assert!(cc.status.success(), "{}", String::from_utf8_lossy(&cc.stderr));
    let from_c = String::from_utf8(Command::new(&exe).output().unwrap().stdout).unwrap();
    assert_eq!(from_python.trim_end(), example);
    assert_eq!(from_c, format!("{example}\r\n"));
    let mut fields = Vec::new();
    lines::parse(example.as_bytes(), &mut fields).expect("termvel accepts the example");
    assert_eq!((fields[0].key, fields[0].unit, fields[0].value), ("vehicle.speed", Some("km/h"), 83.21));
    assert_eq!((fields[1].key, fields[1].value), ("battery.temp", 41.5));
    // One flipped character and the checksum catches it.
    let bad = example.replace("83.21", "83.31");
    assert!(lines::parse(bad.as_bytes(), &mut fields).is_err());
}

// Issue 13, item 5: on an slcan port, lines that began with a letter but
// were no frame (`hello world`, `ZZZZ`) and the adapter's replies (BEL,
// version, serial number) were neither recorded nor counted. Issue 13,
// item 8: a busy live recording held time reversals.
#[test]
fn an_adapter_port_records_or_counts_everything_and_never_goes_back_in_time() {
    let dir = tempfile::tempdir().unwrap();
    let mut adapter = Pty::new();
    let child = spawn_live(&[
        "--serial".into(),
        format!("{},proto=slcan,name=pt", adapter.path),
        "--headless".into(),
        "--every".into(),
        "500ms".into(),
        "--for".into(),
        "3s".into(),
        "--record-dir".into(),
        dir.path().display().to_string(),
    ]);
    adapter.read_until(b"O\r", Duration::from_secs(10));
    std::thread::sleep(Duration::from_millis(300));
    let frame = slcan::encode(&speed_frame(250.0), None).unwrap();
    // Replies to the three commands (two acknowledgements and a refusal),
    // version, serial number, a transmit acknowledgement: six replies.
    adapter.send(b"\r\r\x07V1013\rN1234\rz\r");
    // Two lines that are no message at all.
    adapter.send(b"hello world\rZZZZ\r");
    // Then a busy bus: bursts of frames as fast as the pty takes them.
    let burst: String = (0..200).map(|_| format!("{frame}\r")).collect();
    for _ in 0..10 {
        adapter.send(burst.as_bytes());
        std::thread::sleep(Duration::from_millis(50));
    }
    let out = child.wait_with_output().unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let summary: serde_json::Value = serde_json::from_str(stdout.lines().last().unwrap()).unwrap();
    let s = &summary["summary"];
    assert_eq!((s["parse_errors"].as_u64(), s["replies"].as_u64()), (Some(2), Some(6)), "{summary}");
    assert_eq!(s["can_frames"], 2000, "{summary}");
    let rec = recording_in(dir.path());
    let text = std::fs::read_to_string(&rec).unwrap();
    assert!(text.contains("] pt line hello world\n") && text.contains("] pt line ZZZZ\n"), "bad lines kept");
    assert!(text.contains("] pt line V1013\n") && text.contains("] pt line N1234\n"), "replies kept");
    // No time reversal anywhere in the recording.
    let mut r = termvel::record::RecordingReader::open(&rec).unwrap();
    let times: Vec<i64> = std::iter::from_fn(|| r.next_event()).map(|e| e.t_ns).collect();
    let back = times.windows(2).filter(|w| w[1] < w[0]).count();
    assert_eq!(back, 0, "{back} reversals in {} events", times.len());
    // A replay counts the same.
    let replay = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["replay", rec.to_str().unwrap(), "--headless", "--no-record", "--every", "500ms"])
        .output()
        .unwrap();
    assert!(replay.status.success());
    let replayed: serde_json::Value =
        serde_json::from_str(String::from_utf8_lossy(&replay.stdout).lines().last().unwrap()).unwrap();
    assert_eq!(replayed["summary"]["replies"], 6);
    assert_eq!(replayed["summary"]["parse_errors"], 2);
    assert_eq!(replayed["summary"]["time_reversals"], 0);
}

// Issue 13, item 9, end to end: a logger that sends a speed of 1e308 km/h
// (and then sensible ones): the value is rejected and counted, never shown,
// and the recording it is kept in reports and exports without an infinite
// or absurd number anywhere.
#[test]
fn an_absurd_value_from_a_logger_is_rejected_everywhere_it_could_show() {
    let dir = tempfile::tempdir().unwrap();
    let mut logger = Pty::new();
    let child = spawn_live(&[
        "--serial".into(),
        format!("{},proto=lines,name=log", logger.path),
        "--headless".into(),
        "--every".into(),
        "200ms".into(),
        "--for".into(),
        "3s".into(),
        "--record-dir".into(),
        dir.path().display().to_string(),
    ]);
    std::thread::sleep(Duration::from_millis(800));
    logger.send(format!("{}\n", lines::format(&[("vehicle.speed", Some("km/h"), 1e308)])).as_bytes());
    // Often enough that the speed is never stale (the map expects it at
    // the CAN message's rate).
    for i in 0..60 {
        std::thread::sleep(Duration::from_millis(20));
        let v = 100.0 + (i % 10) as f64;
        logger.send(format!("{}\n", lines::format(&[("vehicle.speed", Some("km/h"), v)])).as_bytes());
    }
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let stdout = String::from_utf8_lossy(&out.stdout);
    let summary: serde_json::Value = serde_json::from_str(stdout.lines().last().unwrap()).unwrap();
    assert_eq!(summary["summary"]["rejected_values"], 1, "{summary}");
    let absurd = |text: &str| text.contains("inf") || text.contains("NaN") || text.contains("e30");
    assert!(!absurd(&stdout), "nothing absurd in the headless lines");
    let rec = recording_in(dir.path());
    assert!(std::fs::read_to_string(&rec).unwrap().contains("vehicle.speed[km/h]=1e308"), "kept in the recording");
    // The report: the peak is a speed a car can have.
    let report =
        Command::new(env!("CARGO_BIN_EXE_termvel")).args(["report", rec.to_str().unwrap(), "--json"]).output().unwrap();
    assert!(report.status.success(), "{}", String::from_utf8_lossy(&report.stderr));
    let r: serde_json::Value = serde_json::from_slice(&report.stdout).unwrap();
    let text = r.to_string();
    assert!(!absurd(&text), "{text}");
    // (A peak of 1e308 km/h would read 2.8e307 above. The report counts a
    // speed only while it is fresh, which a machine busy enough to delay
    // the sender could deny it: when there is a peak, it is a sent one.)
    if let Some(peak) = r["runs"][0]["peak_speed_mps"].as_f64() {
        assert!((99.0 / 3.6..=109.5 / 3.6).contains(&peak), "peak {peak} m/s: among the sensible speeds sent");
    }
    // The export: no column holds it.
    let csv = dir.path().join("run.csv");
    let export = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["export", rec.to_str().unwrap(), "--to", "csv", "--out", csv.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(export.status.success(), "{}", String::from_utf8_lossy(&export.stderr));
    let table = std::fs::read_to_string(&csv).unwrap();
    assert!(table.lines().count() > 5 && !absurd(&table), "{}", &table[..table.len().min(2000)]);
}
