//! Outputs under faults (issue 13): the recorder on a full disk (held in
//! memory, retried, never a torn line, the exit code and summary telling
//! the truth), exports and plots that never leave a partial file or
//! overwrite their input, and write errors that name the path.
//!
//! The full-disk tests mount a small tmpfs (CI runs as root); as root a
//! tmpfs that cannot be mounted fails the test, so CI never passes without
//! checking; as another user they say so and pass without checking.

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use crate::util::{demo, root, stderr, stdout, termvel};

/// A tmpfs of `size` mounted on a fresh directory, unmounted on drop.
struct Tmpfs {
    _dir: tempfile::TempDir,
    path: PathBuf,
}

impl Tmpfs {
    fn mount(size: &str) -> Option<Tmpfs> {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().to_path_buf();
        let out =
            Command::new("mount").args(["-t", "tmpfs", "-o", &format!("size={size}"), "tmpfs"]).arg(&path).output();
        let root = Command::new("id").arg("-u").output().is_ok_and(|o| o.stdout.trim_ascii() == b"0");
        match out {
            Ok(o) if o.status.success() => Some(Tmpfs { _dir: dir, path }),
            Ok(o) if root => {
                panic!("running as root, yet cannot mount a tmpfs: {}", String::from_utf8_lossy(&o.stderr))
            }
            Err(e) if root => panic!("running as root, yet cannot run mount: {e}"),
            Ok(o) => {
                eprintln!("skipped: cannot mount a tmpfs: {}", String::from_utf8_lossy(&o.stderr).trim());
                None
            }
            Err(e) => {
                eprintln!("skipped: cannot run mount: {e}");
                None
            }
        }
    }
}

impl Drop for Tmpfs {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.path).status();
    }
}

/// The one recording in `dir`.
fn recording_in(dir: &Path) -> PathBuf {
    let files: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "tvrec"))
        .collect();
    assert_eq!(files.len(), 1, "{files:?}");
    files[0].clone()
}

/// The closing summary of a headless run's stdout.
fn summary(out: &str) -> serde_json::Value {
    let last = out.lines().last().expect("a summary line");
    serde_json::from_str::<serde_json::Value>(last).unwrap()["summary"].clone()
}

/// The summary of a replay of `file`, unrecorded.
fn replayed(file: &Path) -> serde_json::Value {
    let o = termvel(&["replay", "--headless", "--no-record", file.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    summary(&stdout(&o))
}

// Issue 13, item 1: a full disk exited 0 saying `recorded 0 events`, with a
// torn last line and no alert.
#[test]
fn a_disk_full_to_the_end_exits_1_with_whole_lines_an_alert_and_a_true_count() {
    let Some(fs) = Tmpfs::mount("200k") else { return };
    let o = termvel(&["rehearse", "--headless", "--as-fast-as-possible", "--record-dir", fs.path.to_str().unwrap()]);
    let (out, err) = (stdout(&o), stderr(&o));
    assert_eq!(o.status.code(), Some(1), "{err}");
    let file = recording_in(&fs.path);
    let bytes = std::fs::read(&file).unwrap();
    assert!(bytes.ends_with(b"\n"), "no torn last line");
    assert!(err.contains("recording failing") && err.contains("No space left"), "{err}");
    assert!(out.contains("\"key\":\"recording\""), "the alert is in the JSON");
    let s = summary(&out);
    let rec = &s["recording"];
    let back = replayed(&file);
    assert_eq!(back["torn_tail"], false);
    // Every event in the file is counted as recorded, and the rest as
    // unwritten: none vanish.
    let in_file = rec["recorded_events"].as_u64().unwrap();
    assert!(in_file > 1000, "{rec}");
    assert!(err.contains(&format!("recorded {in_file} events")), "{err}");
    let unwritten = rec["unwritten_events"].as_u64().unwrap();
    assert!(unwritten > 30_000 && rec["complete"] == false, "{rec}");
    assert!(back["events"].as_u64().unwrap() <= in_file, "{back} {rec}");
}

// Issue 13, item 1, live: a live session on a serial adapter (a
// pseudo-terminal) recording to a disk that fills: it said nothing and its
// summary said `recorded_events: 0`. Now stderr says the recording is
// failing, the run exits 1, and every event is counted as written or not.
#[test]
fn a_live_session_on_a_full_disk_exits_1_and_counts_every_event() {
    use termvel::event::{CanFrame, CanId, DataFrame};
    let Some(fs) = Tmpfs::mount("64k") else { return };
    let mut adapter = crate::pty::Pty::new();
    let child = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["live", "--serial", &format!("{},proto=slcan,name=pt", adapter.path)])
        .args(["--headless", "--every", "500ms", "--for", "4s", "--record-dir", fs.path.to_str().unwrap()])
        .current_dir(root())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    adapter.read_until(b"O\r", std::time::Duration::from_secs(10));
    std::thread::sleep(std::time::Duration::from_millis(300));
    let frame = CanFrame::Data(DataFrame::new(CanId::Standard(0x0C4), &[0, 0, 0, 0, 0, 0, 0, 0]).unwrap());
    let line = format!("{}\r", termvel::decode::slcan::encode(&frame, None).unwrap());
    // About 60 bytes a recorded frame: 4 000 frames are some 240 kB, far
    // more than the 64 kB the disk holds.
    let burst: String = (0..400).map(|_| line.as_str()).collect();
    for _ in 0..10 {
        adapter.send(burst.as_bytes());
        std::thread::sleep(std::time::Duration::from_millis(100));
    }
    let o = child.wait_with_output().unwrap();
    let (out, err) = (stdout(&o), stderr(&o));
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("recording failing") && err.contains("No space left"), "{err}");
    let s = summary(&out);
    let rec = &s["recording"];
    let file = recording_in(&fs.path);
    assert!(std::fs::read(&file).unwrap().ends_with(b"\n"), "no torn last line");
    let recorded = rec["recorded_events"].as_u64().unwrap();
    let unwritten = rec["unwritten_events"].as_u64().unwrap();
    assert!(recorded > 100 && unwritten > 1000 && rec["complete"] == false, "{rec}");
    assert!(err.contains(&format!("recorded {recorded} events")), "{err}");
    assert_eq!(s["can_frames"], 4000, "every frame read: {s}");
    // Every event the run counted is in the file or counted as unwritten
    // (the recorder's count also holds the session's own lines: its link
    // changes and notes, a handful).
    let events = s["events"].as_u64().unwrap();
    assert!((events..events + 16).contains(&(recorded + unwritten)), "every event written or counted: {events} {rec}");
    let back = replayed(&file);
    assert_eq!(back["torn_tail"], false);
    assert!(back["events"].as_u64().unwrap() <= recorded, "{back} {rec}");
}

// Issue 13, item 1: space freed during the run: every event is written,
// in order, and the run ends well.
#[test]
fn space_freed_during_the_run_loses_nothing() {
    let Some(fs) = Tmpfs::mount("4m") else { return };
    let filler = fs.path.join("filler");
    std::fs::write(&filler, vec![0u8; 4 * 1024 * 1024 - 64 * 1024]).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["rehearse", "--headless", "--speed", "20", "--record-dir", fs.path.to_str().unwrap()])
        .current_dir(root())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let stdout_pipe = child.stdout.take().unwrap();
    let out_thread = std::thread::spawn(move || std::io::read_to_string(stdout_pipe).unwrap());
    let mut err = String::new();
    let mut lines = BufReader::new(child.stderr.take().unwrap()).lines();
    for l in lines.by_ref() {
        let l = l.unwrap();
        err.push_str(&l);
        err.push('\n');
        if l.contains("recording failing") {
            std::fs::remove_file(&filler).unwrap();
            break;
        }
    }
    for l in lines {
        err.push_str(&l.unwrap());
        err.push('\n');
    }
    let status = child.wait().unwrap();
    let out = out_thread.join().unwrap();
    assert!(err.contains("recording failing"), "the disk filled: {err}");
    assert!(err.contains("takes writes again"), "{err}");
    assert_eq!(status.code(), Some(0), "{err}");
    let s = summary(&out);
    let rec = &s["recording"];
    assert_eq!((rec["complete"].as_bool(), rec["dropped_events"].as_u64()), (Some(true), Some(0)), "{rec}");
    assert!(rec["held_then_written"].as_u64().unwrap() > 0, "{rec}");
    let back = replayed(&recording_in(&fs.path));
    for k in ["events", "can_frames", "samples"] {
        assert_eq!(back[k], s[k], "{k}: the replay holds every event of the run");
    }
    assert_eq!(back["torn_tail"], false);
    assert_eq!(back["time_reversals"], 0, "in order");
}

// Issue 13, item 2: an export to a full disk left a partial file.
#[test]
fn an_export_to_a_full_disk_leaves_no_file_and_names_the_path() {
    let Some(fs) = Tmpfs::mount("100k") else { return };
    let out = fs.path.join("run.csv");
    let o = termvel(&["export", demo().to_str().unwrap(), "--to", "csv", "--out", out.to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains(out.to_str().unwrap()) && err.contains("No space left"), "{err}");
    let left: Vec<_> = std::fs::read_dir(&fs.path).unwrap().map(|e| e.unwrap().file_name()).collect();
    assert!(left.is_empty(), "no file, partial or temporary: {left:?}");
}

// Issue 13, item 11: plots on a full disk printed a raw debug dump naming
// no file.
#[test]
fn plots_on_a_full_disk_name_the_file_that_failed() {
    let Some(fs) = Tmpfs::mount("64k") else { return };
    let dir = fs.path.join("plots");
    let o = termvel(&["report", demo().to_str().unwrap(), "--plots", dir.to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains(dir.to_str().unwrap()) && err.contains("No space left"), "{err}");
    assert!(!err.contains("BackendError") && !err.contains("Os {"), "no debug dump: {err}");
    // Issue 13, item 2: the plot being written when the disk filled was
    // left behind, cut short. What is there now is whole, and no temporary.
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        let name = p.file_name().unwrap().to_string_lossy().into_owned();
        assert!(!name.starts_with('.'), "no temporary left: {name}");
        let bytes = std::fs::read(&p).unwrap();
        let whole = match p.extension().and_then(|x| x.to_str()) {
            Some("svg") => bytes.trim_ascii_end().ends_with(b"</svg>"),
            Some("png") => bytes.ends_with(b"IEND\xAE\x42\x60\x82"),
            _ => false,
        };
        assert!(whole, "{name}: a partial plot ({} bytes)", bytes.len());
    }
}

// Issue 13, item 2: `export same.tvrec --to csv --out same.tvrec` (and
// through a symlink) replaced the recording with a CSV.
#[test]
fn an_export_onto_its_input_is_refused_and_the_input_is_kept() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("same.tvrec");
    std::fs::copy(demo(), &input).unwrap();
    let before = std::fs::read(&input).unwrap();
    let link = dir.path().join("link.csv");
    std::os::unix::fs::symlink(&input, &link).unwrap();
    for out in [&input, &link] {
        for to in ["csv", "parquet"] {
            let o = termvel(&["export", input.to_str().unwrap(), "--to", to, "--out", out.to_str().unwrap()]);
            let err = stderr(&o);
            assert_eq!(o.status.code(), Some(2), "{err}");
            assert!(err.contains("refusing to overwrite") && err.contains(out.to_str().unwrap()), "{err}");
        }
    }
    assert_eq!(std::fs::read(&input).unwrap(), before, "the recording is untouched");
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2, "no other file");
}

// Issue 13, item 11: an --out that cannot even be created (its folder is
// missing) is unusable input: exit 2, the path named, nothing written.
#[test]
fn an_export_to_a_folder_that_is_not_there_is_unusable_input() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("no-such-folder").join("run.csv");
    for to in ["csv", "parquet"] {
        let o = termvel(&["export", demo().to_str().unwrap(), "--to", to, "--out", out.to_str().unwrap()]);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{to}: {err}");
        assert!(err.contains(out.to_str().unwrap()) && err.contains("cannot create"), "{to}: {err}");
    }
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0, "nothing written");
}

/// Runs termvel with stdout on /dev/full.
fn to_dev_full(args: &[&str]) -> std::process::Output {
    let full = std::fs::OpenOptions::new().write(true).open("/dev/full").unwrap();
    Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(args)
        .current_dir(root())
        .stdout(full)
        .stderr(Stdio::piped())
        .output()
        .unwrap()
}

// Issue 13, item 11: `report --json D > /dev/full` and `replay --headless
// … > /dev/full` exited 0.
#[test]
fn output_that_cannot_be_written_exits_1_and_says_so() {
    let d = demo();
    let d = d.to_str().unwrap();
    for args in [vec!["report", "--json", d], vec!["report", d], vec!["replay", "--headless", "--no-record", d]] {
        let o = to_dev_full(&args);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(1), "{args:?}: {err}");
        assert!(err.contains("cannot write to standard output: No space left"), "{args:?}: {err}");
    }
    // A reader that goes away (`| head`) is not a failure.
    let mut child = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["replay", "--headless", "--no-record", d])
        .current_dir(root())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    assert_eq!(child.wait().unwrap().code(), Some(0));
}

// Issue 13, item 11: `report --plots README.md` printed the whole report,
// then `File exists (os error 17)`.
#[test]
fn a_plots_folder_that_is_a_file_is_refused_before_the_report_is_printed() {
    let o = termvel(&["report", demo().to_str().unwrap(), "--plots", "README.md"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("README.md: --plots needs a folder"), "{err}");
    assert!(stdout(&o).is_empty(), "nothing printed: {}", stdout(&o));
}

// Issue 13, item 13: `lost 18446744073709551615` twice wrapped the count
// (a panic in a debug build), and the recorder's own `lost` line (events
// it dropped on a full disk) raised no alert on replay or in the report.
#[test]
fn lost_counts_saturate_and_the_recorders_losses_alert_on_replay_and_report() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(demo()).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    let at = lines.iter().position(|l| l.starts_with("[1773474135.600000]")).unwrap();
    lines.insert(at, "[1773474135.600000] session lost 12");
    lines.insert(at, "[1773474135.500000] can0 lost 18446744073709551615");
    lines.insert(at, "[1773474135.500000] can0 lost 18446744073709551615");
    let file = dir.path().join("lost.tvrec");
    std::fs::write(&file, lines.join("\n") + "\n").unwrap();
    let f = file.to_str().unwrap();
    let o = termvel(&["replay", "--headless", "--no-record", f]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains("\"key\":\"lost:recording\""), "the recorder's losses alert on replay");
    assert!(out.contains("\"key\":\"lost:can0\""));
    let o = termvel(&["report", "--json", f]);
    assert!(o.status.success(), "{}", stderr(&o));
    let j: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    let text = j.to_string();
    assert!(text.contains("the recorder dropped 12 events"), "in the report's alerts");
    assert!(text.contains("\"lost_frames\":18446744073709551615"), "saturated, not wrapped: {text}");
}

// Issue 13, item 11: `envelope --plots` on a full disk exited 1 with a raw
// debug dump (`BackendError(DrawingError(Os { code: 28 … }))`) naming no
// file, and left its temporary behind.
#[test]
fn envelope_plots_on_a_full_disk_name_the_file_and_leave_nothing() {
    let Some(fs) = Tmpfs::mount("16k") else { return };
    let dir = fs.path.join("p");
    let o = termvel(&["envelope", "--plots", dir.to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    let svg = dir.join("envelope-power-speed.svg");
    assert!(err.contains(svg.to_str().unwrap()) && err.contains("No space left"), "{err}");
    assert!(!err.contains("Os {") && !err.contains("BackendError("), "no debug dump: {err}");
    let left: Vec<_> = std::fs::read_dir(&dir).unwrap().map(|e| e.unwrap().file_name()).collect();
    assert!(left.is_empty(), "no partial file or temporary: {left:?}");
}
