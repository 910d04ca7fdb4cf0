//! Config errors as a user meets them: every malformed file is refused with
//! the line, column, key and wording a person can act on, the shipped
//! configs are accepted, and `termvel check` exits and prints as documented.
//!
//! Contents:
//! - the corpus: every `tests/configs/bad/*.toml` names its expected error
//!   in a `# expect: LINE:COLUMN KEY :: SUBSTRING` header, and
//!   `validate_text` must report exactly that (golden files, checked one by
//!   one, every mismatch reported as `file:line` before the test fails);
//! - the configs in `config/` validate with no errors;
//! - `termvel check` run as a process: exit status 0 or 2, the
//!   `FILE:LINE:COL: KEY: message` form, an unreadable file, and the bus-load
//!   summary and its warning threshold.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use termvel::config::validate_text;

/// Where the corpus lives, relative to the crate root; also the prefix of
/// every origin, so messages name files the way a user at the root types them.
const BAD_DIR: &str = "tests/configs/bad";

/// The corpus must cover at least the problems listed in its brief; a smaller
/// count means files were lost, not that the checks got better.
const MIN_CORPUS: usize = 24;

/// Exit status of `termvel` for unusable input (`cmd::EXIT_UNUSABLE`).
const EXIT_UNUSABLE: i32 = 2;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// The `*.toml` files of `dir` (relative to the crate root), sorted so
/// failures come out in a stable order.
fn toml_files(dir: &str) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(root().join(dir))
        .unwrap_or_else(|e| panic!("{dir}: {e}"))
        .map(|e| e.expect("directory entry").path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    files.sort();
    files
}

/// What a corpus file's first line promises.
#[derive(Debug)]
struct Expect {
    line: usize,
    column: usize,
    /// Empty when the header says `-` (an error without a key).
    key: String,
    substring: String,
}

/// Parses `# expect: LINE:COLUMN KEY :: SUBSTRING`.
fn parse_expect(first_line: &str) -> Result<Expect, String> {
    let bad = || format!("expected a first line `# expect: LINE:COLUMN KEY :: SUBSTRING`, found {first_line:?}");
    let rest = first_line.strip_prefix("# expect: ").ok_or_else(bad)?;
    let (location_key, substring) = rest.split_once(" :: ").ok_or_else(bad)?;
    let (location, key) = location_key.split_once(' ').ok_or_else(bad)?;
    let (line, column) = location.split_once(':').ok_or_else(bad)?;
    Ok(Expect {
        line: line.parse().map_err(|_| bad())?,
        column: column.parse().map_err(|_| bad())?,
        key: if key == "-" { String::new() } else { key.to_string() },
        substring: substring.to_string(),
    })
}

/// The origin a user at the crate root would type: `tests/configs/bad/x.toml`.
fn origin(path: &Path) -> String {
    format!("{BAD_DIR}/{}", path.file_name().expect("a file name").to_string_lossy())
}

#[test]
fn every_bad_config_fails_where_its_header_says() {
    let files = toml_files(BAD_DIR);
    let mut failures = String::new();
    for path in &files {
        let origin = origin(path);
        let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{origin}: {e}"));
        let expect = match parse_expect(text.lines().next().unwrap_or("")) {
            Ok(x) => x,
            Err(e) => {
                let _ = writeln!(failures, "{origin}:1: {e}");
                continue;
            }
        };
        let report = validate_text(&origin, &text);
        let found = report.errors.iter().any(|e| {
            e.line == expect.line
                && e.column == expect.column
                && e.key == expect.key
                && e.message.contains(&expect.substring)
        });
        // Failures point at the line the error was expected on, so an editor
        // that understands `file:line` jumps to the spot in question.
        if !found {
            let got: Vec<String> =
                report.errors.iter().map(|e| format!("{}:{} {} :: {}", e.line, e.column, e.key, e.message)).collect();
            let _ = writeln!(
                failures,
                "{origin}:{}: expected an error at {}:{} key {:?} containing {:?}; got {}",
                expect.line,
                expect.line,
                expect.column,
                expect.key,
                expect.substring,
                if got.is_empty() { "no errors".to_string() } else { got.join(" | ") }
            );
        } else if report.errors.len() > 1 {
            // One problem per file: a second error means the file exercises
            // more than its name says, and a regression in one check could
            // hide behind the other.
            let got: Vec<String> = report.errors.iter().map(|e| e.to_string()).collect();
            let _ = writeln!(
                failures,
                "{origin}:{}: expected exactly one error, got {}: {}",
                expect.line,
                got.len(),
                got.join(" | ")
            );
        }
    }
    assert!(failures.is_empty(), "config corpus mismatches:\n{failures}");
}

#[test]
fn corpus_is_complete() {
    let n = toml_files(BAD_DIR).len();
    assert!(n >= MIN_CORPUS, "{BAD_DIR} holds {n} files, expected at least {MIN_CORPUS}");
}

#[test]
fn shipped_configs_are_valid() {
    let files = toml_files("config");
    assert!(!files.is_empty(), "config/ holds no .toml files");
    let mut failures = String::new();
    for path in &files {
        let origin = format!("config/{}", path.file_name().expect("a file name").to_string_lossy());
        let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{origin}: {e}"));
        let report = validate_text(&origin, &text);
        for e in &report.errors {
            let _ = writeln!(failures, "{e}");
        }
        if report.errors.is_empty() && report.parsed.is_none() {
            let _ = writeln!(failures, "{origin}: no errors, but nothing was parsed");
        }
    }
    assert!(failures.is_empty(), "shipped configs have errors:\n{failures}");
}

// ---------------------------------------------------------------------------
// `termvel check`, run as a user runs it.

/// Runs the built binary from the crate root (relative paths as in the docs).
fn termvel(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(args)
        .current_dir(root())
        .output()
        .expect("the termvel binary runs")
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Stdout and stderr together, for messages whose stream is not the point.
fn all_output(o: &Output) -> String {
    format!("{}{}", String::from_utf8_lossy(&o.stdout), String::from_utf8_lossy(&o.stderr))
}

#[test]
fn check_accepts_the_demo_set() {
    let o = termvel(&[
        "check",
        "config/vehicle.toml",
        "config/track.toml",
        "config/signals.toml",
        "config/alerts.toml",
        "config/demo-plan.toml",
    ]);
    let out = all_output(&o);
    assert_eq!(o.status.code(), Some(0), "{out}");
    // "invalid:" also contains "valid:", so look for the summary line itself.
    assert!(stdout(&o).lines().any(|l| l.starts_with("valid:")), "{out}");
    assert!(out.contains("worst case"), "no bus-load line: {out}");
}

#[test]
fn check_locates_an_error_and_exits_2() {
    let file = format!("{BAD_DIR}/signals-scale-zero.toml");
    let text = std::fs::read_to_string(root().join(&file)).expect("corpus file");
    let x = parse_expect(text.lines().next().unwrap_or("")).expect("header");
    let o = termvel(&["check", &file]);
    let out = stdout(&o);
    assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{}", all_output(&o));
    // The form editors and terminals turn into a link: FILE:LINE:COL: KEY: message.
    let located = format!("{file}:{}:{}: {}: ", x.line, x.column, x.key);
    assert!(out.lines().any(|l| l.starts_with(&located) && l.contains(&x.substring)), "want {located}…: {out}");
    assert!(out.lines().any(|l| l.starts_with("invalid:")), "{out}");
}

#[test]
fn check_names_a_missing_file_and_exits_2() {
    let missing = "config/no-such-file.toml";
    let o = termvel(&["check", missing]);
    let out = all_output(&o);
    assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{out}");
    assert!(out.contains(missing), "the missing file is not named: {out}");
}

/// A signals file of classic 8-byte frames with no signals: `(id, extended,
/// period_ms)` per message. Empty messages draw a warning each, which does not
/// change the exit status and keeps the file to what the bus load needs.
fn signals_file(bitrate: u32, messages: &[(u32, bool, f64)]) -> String {
    let mut s = format!("kind = \"signals\"\nbitrate = {bitrate}\n");
    for (i, (id, extended, period_ms)) in messages.iter().enumerate() {
        let frame = if *extended { "frame = \"extended\"\n" } else { "" };
        let _ =
            write!(s, "\n[[message]]\nid = 0x{id:X}\n{frame}name = \"m{i}\"\nperiod_ms = {period_ms}\nlength = 8\n");
    }
    s
}

/// Writes `text` to a temporary directory and runs `termvel check` on it.
fn check_text(text: &str) -> Output {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let path = dir.path().join("signals.toml");
    std::fs::write(&path, text).expect("write the signals file");
    termvel(&["check", path.to_str().expect("a UTF-8 temporary path")])
}

#[test]
fn check_warns_when_the_bus_is_overloaded() {
    // Three standard 8-byte frames every 1 ms on 500 kbit/s: 3 × 135 bits ×
    // 1000/s = 405 000 bit/s, 81 % worst case (135 = 55 + 10·8, REFERENCES.md).
    let text = signals_file(500_000, &[(0x100, false, 1.0), (0x101, false, 1.0), (0x102, false, 1.0)]);
    let o = check_text(&text);
    let out = stdout(&o);
    assert!(out.contains("81.0 % worst case"), "{out}");
    assert!(out.contains("above 70 %"), "no bus-load warning: {out}");
    // A warning is not an error: the file is still usable.
    assert_eq!(o.status.code(), Some(0), "{}", all_output(&o));
}

/// The REFERENCES.md example map: 20 standard 8-byte messages every 10 ms
/// and 10 extended 8-byte messages every 20 ms on 500 kbit/s.
fn reference_example() -> String {
    let mut messages: Vec<(u32, bool, f64)> = (0..20).map(|i| (0x100 + i, false, 10.0)).collect();
    messages.extend((0..10).map(|i| (0x1800_0000 + i, true, 20.0)));
    signals_file(500_000, &messages)
}

#[test]
fn check_reports_the_reference_bus_load() {
    // REFERENCES.md, "CAN frame length and bus load": 20 standard 8-byte
    // messages at 100 Hz plus 10 extended 8-byte at 50 Hz on 500 kbit/s →
    // 70.0 % worst case. By hand: 20 × 135 bits × 100/s + 10 × 160 bits × 50/s
    // = 270 000 + 80 000 = 350 000 bit/s, and 350 000 / 500 000 = 0.700.
    let o = check_text(&reference_example());
    let out = stdout(&o);
    assert_eq!(o.status.code(), Some(0), "{}", all_output(&o));
    assert!(out.contains("30 messages"), "{out}");
    assert!(out.contains("70.0 % worst case"), "{out}");
}

// Regression: the per-message loads sum to 0.7000000000000004 in f64, which
// a plain `>` took for "above 70 %" although the line reads 70.0 %.
#[test]
fn check_does_not_warn_at_exactly_the_threshold() {
    // REFERENCES.md: this map loads the bus 70.0 % worst case, which is not
    // above the 70 % warning threshold.
    let o = check_text(&reference_example());
    let out = stdout(&o);
    assert!(out.contains("70.0 % worst case"), "{out}");
    assert!(!out.contains("above 70 %"), "warned at exactly 70 %: {out}");
}

// ---------------------------------------------------------------------------
// Regressions of issue 13: reads that never end, a plan's references, files
// that hide each other's errors.

/// A copy of the demo plan in `dir` whose `vehicle` key names `vehicle`,
/// beside the demo's other files; returns its path.
fn plan_naming(dir: &Path, file: &str, vehicle: &str) -> PathBuf {
    for f in ["vehicle.toml", "track.toml", "signals.toml", "alerts.toml"] {
        std::fs::copy(root().join("config").join(f), dir.join(f)).expect("copy a demo file");
    }
    let plan = std::fs::read_to_string(root().join("config/demo-plan.toml")).expect("the demo plan");
    let plan: String = plan
        .lines()
        .map(|l| if l.starts_with("vehicle = ") { format!("vehicle = {vehicle:?}\n") } else { format!("{l}\n") })
        .collect();
    let p = dir.join(file);
    std::fs::write(&p, plan).expect("write the plan");
    p
}

/// Line and column of the `vehicle` value in the demo plan (1-based), read
/// from the file itself so the test follows edits of the demo.
fn vehicle_key_location() -> (usize, usize) {
    let plan = std::fs::read_to_string(root().join("config/demo-plan.toml")).expect("the demo plan");
    let (i, l) = plan.lines().enumerate().find(|(_, l)| l.starts_with("vehicle = ")).expect("a vehicle key");
    (i + 1, l.find('"').expect("a quoted name") + 1)
}

// Issue 13, item 15: `check` passed plans whose vehicle file was missing, the
// plan itself, a directory, empty, another plan (two plans naming each
// other), a file of another kind or an invalid vehicle; `plan` then failed
// with messages that named no location.
#[test]
fn issue13_check_follows_a_plans_references() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let d = dir.path();
    let mut bad_vehicle = std::fs::read_to_string(root().join("config/vehicle.toml")).expect("demo vehicle");
    bad_vehicle = bad_vehicle.replace("mass_kg = ", "mass_kg = -3 #");
    std::fs::write(d.join("bad-vehicle.toml"), bad_vehicle).expect("write");
    let (line, column) = vehicle_key_location();
    let cases: [(&str, &str, &str); 8] = [
        ("missing.toml", "no-such.toml", "No such file"),
        ("itself.toml", "itself.toml", "found the plan itself"),
        ("directory.toml", ".", "is a directory"),
        ("a.toml", "b.toml", "expected a vehicle file, found a plan config"),
        ("b.toml", "a.toml", "expected a vehicle file, found a plan config"),
        ("kind.toml", "track.toml", "expected a vehicle file, found a track config"),
        ("invalid.toml", "bad-vehicle.toml", "is not valid (1 error, below)"),
        ("device.toml", "/dev/zero", "not a regular file"),
    ];
    // Every plan first: two of them name each other.
    for (file, vehicle, _) in cases {
        plan_naming(d, file, vehicle);
    }
    for (file, _, want) in cases {
        let p = d.join(file);
        let ps = p.to_str().expect("UTF-8 path");
        let o = termvel(&["check", ps]);
        let out = stdout(&o);
        assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{file}: {}", all_output(&o));
        let located = format!("{ps}:{line}:{column}: vehicle: ");
        assert!(
            out.lines().any(|l| l.starts_with(&located) && l.contains(want)),
            "{file}: want {located}…{want}: {out}"
        );
        // `plan` refuses it with the same located message, not `: cannot read`.
        let o = termvel(&["plan", ps, "--trials", "10"]);
        let err = all_output(&o);
        assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{file}: {err}");
        assert!(err.contains(&located) && err.contains(want), "{file}: plan said: {err}");
    }
    // The empty name is refused by the plan's own validation.
    let p = plan_naming(d, "empty.toml", "");
    let o = termvel(&["check", p.to_str().expect("UTF-8 path")]);
    let out = stdout(&o);
    assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{out}");
    assert!(out.contains(&format!(":{line}:{column}: vehicle: expected the name of a vehicle file")), "{out}");
    // The invalid vehicle's own error follows, located in its own file.
    let o = termvel(&["check", d.join("invalid.toml").to_str().expect("UTF-8 path")]);
    assert!(stdout(&o).contains("bad-vehicle.toml:"), "{}", stdout(&o));
}

// Issue 13, item 10: `check /dev/zero`, `--config /dev/zero` and a plan whose
// vehicle is /dev/zero grew memory by about 1 GB a second.
#[test]
fn issue13_config_reads_are_bounded() {
    let o = termvel(&["check", "/dev/zero"]);
    assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{}", all_output(&o));
    assert!(stdout(&o).contains("/dev/zero: is not a regular file"), "{}", all_output(&o));
    let o = termvel(&["plan", "--config", "/dev/zero"]);
    assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{}", all_output(&o));
    assert!(all_output(&o).contains("/dev/zero: is not a regular file"), "{}", all_output(&o));
    let dir = tempfile::tempdir().expect("a temporary directory");
    let big = dir.path().join("big.toml");
    std::fs::write(&big, vec![b'#'; (termvel::config::MAX_CONFIG_BYTES + 1) as usize]).expect("write");
    let o = termvel(&["check", big.to_str().expect("UTF-8 path")]);
    assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{}", all_output(&o));
    assert!(stdout(&o).contains("config files are limited to 4 MiB"), "{}", all_output(&o));
}

// Issue 13, item 16: an invalid UTF-8 file got no position, and one
// unreadable file in a directory hid every other file's errors.
#[test]
fn issue13_one_bad_file_does_not_hide_the_others() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let d = dir.path();
    std::fs::write(d.join("a-utf.toml"), b"kind = \"track\"\nname = \"x\xff\"\n").expect("write");
    std::os::unix::fs::symlink(d.join("nowhere.toml"), d.join("b-dangling.toml")).expect("symlink");
    let bad = std::fs::read_to_string(root().join("config/track.toml")).expect("demo track");
    std::fs::write(d.join("c-track.toml"), bad.replace("target_speed_kmh = ", "target_speed_kmh = -1 #"))
        .expect("write");
    let ds = d.to_str().expect("UTF-8 path");
    let o = termvel(&["check", ds]);
    let out = stdout(&o);
    assert_eq!(o.status.code(), Some(EXIT_UNUSABLE), "{out}");
    // `name = "x` is 10 characters: the bad byte is line 2, column 10.
    assert!(out.contains("a-utf.toml:2:10: expected UTF-8 text, found the byte 0xFF"), "{out}");
    assert!(out.contains("b-dangling.toml: cannot read"), "{out}");
    assert!(
        out.contains("c-track.toml:") && out.contains("target_speed_kmh"),
        "the readable file's error is hidden: {out}"
    );
}
