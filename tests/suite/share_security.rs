//! Sharing a run securely (issue 16, items 2 and 4): TLS with client
//! certificates made here with openssl (a CA, the broker's certificate, a
//! valid client certificate, an expired one and one from a CA the broker
//! does not know), an ACL that lets a named engineer acknowledge and a
//! watcher only watch, and hostile control messages.
//!
//! Needs Debian's `mosquitto`, `mosquitto-clients` and `openssl`
//! (scripts/setup.sh installs them).

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, Command, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use serde_json::Value;

use crate::share::{Broker, Follower, kind_of, one_at_a_time, parse_lines};
use crate::util::{root, stderr, stdout, termvel};

/// mosquitto run as root drops to its own user, which cannot read keys in
/// a private temporary directory: keep root then (in a test only).
fn stay_root() -> &'static str {
    // SAFETY: geteuid has no preconditions.
    if unsafe { libc::geteuid() } == 0 { "user root\n" } else { "" }
}

/// Certificates made with openssl in a temporary directory: `ca` signs
/// `server` (for 127.0.0.1), `good` and `old` (expired in 2020); `other`
/// (a CA the broker does not know) signs `stranger`. Keys are EC P-256,
/// mode 600.
struct Pki {
    dir: tempfile::TempDir,
}

const PKI_SCRIPT: &str = r#"set -e
ca() {
  openssl req -x509 -newkey ec -pkeyopt ec_paramgen_curve:P-256 -nodes -keyout $1.key -out $1.crt -days 30 \
    -subj /CN=$1 -addext basicConstraints=critical,CA:TRUE -addext keyUsage=critical,keyCertSign,cRLSign 2>/dev/null
  touch $1.index; echo 01 > $1.serial
  printf '%s\n' '[ca]' 'default_ca = d' '[d]' "database = $1.index" 'new_certs_dir = .' "serial = $1.serial" \
    'default_md = sha256' 'policy = p' 'unique_subject = no' '[p]' 'commonName = supplied' \
    '[server]' 'basicConstraints = CA:FALSE' 'keyUsage = digitalSignature' 'extendedKeyUsage = serverAuth' \
    'subjectAltName = IP:127.0.0.1,DNS:localhost' \
    '[client]' 'basicConstraints = CA:FALSE' 'keyUsage = digitalSignature' 'extendedKeyUsage = clientAuth' > $1.cnf
}
leaf() {
  openssl req -newkey ec -pkeyopt ec_paramgen_curve:P-256 -nodes -keyout $1.key -out $1.csr -subj /CN=$3 2>/dev/null
  openssl ca -batch -notext -config $2.cnf -cert $2.crt -keyfile $2.key -in $1.csr -out $1.crt -extensions $4 $5 2>/dev/null
}
ca ca
ca other
leaf server ca 127.0.0.1 server "-days 30"
leaf good ca pit client "-days 30"
leaf old ca pit client "-startdate 20200101000000Z -enddate 20200102000000Z"
leaf stranger other pit client "-days 30"
chmod 600 *.key
"#;

impl Pki {
    fn new() -> Pki {
        let dir = tempfile::tempdir().unwrap();
        let ok = Command::new("sh")
            .args(["-c", PKI_SCRIPT])
            .current_dir(dir.path())
            .status()
            .expect("sh and openssl run (scripts/setup.sh installs openssl)");
        assert!(ok.success(), "openssl made the certificates");
        Pki { dir }
    }

    fn file(&self, name: &str) -> String {
        self.dir.path().join(name).to_string_lossy().into_owned()
    }

    /// The broker's TLS lines: its certificate, the CA it trusts for
    /// clients, a client certificate required and its name the username.
    fn broker_lines(&self) -> String {
        format!(
            "cafile {}\ncertfile {}\nkeyfile {}\nrequire_certificate true\nuse_identity_as_username true\nallow_anonymous false\n{}",
            self.file("ca.crt"),
            self.file("server.crt"),
            self.file("server.key"),
            stay_root()
        )
    }
}

fn follow_tls(url: &str, ca: &str, cert: &str, key: &str) -> (std::process::Output, Duration) {
    let started = Instant::now();
    let out = termvel(&["follow", url, "--headless", "--for", "2s", "--ca", ca, "--cert", cert, "--key", key]);
    (out, started.elapsed())
}

// Issue 16, item 4: TLS with client certificates: the right certificate
// connects (a follower and a publishing rehearsal); an expired one, one
// from a CA the broker does not know, none at all, and a broker whose
// certificate the CA given did not sign are each a clear error and exit 1
// for a follower (at once, not retried), and a link down with the reason
// for the reading station (whose run goes on).
#[test]
fn tls_client_certificates_right_expired_unknown_and_a_broker_not_signed() {
    let _one = one_at_a_time();
    let pki = Pki::new();
    let broker = Broker::start_with(|_| pki.broker_lines());
    let url = format!("mqtts://127.0.0.1:{}", broker.port);
    let (ca, other) = (pki.file("ca.crt"), pki.file("other.crt"));

    let (ok, _) = follow_tls(&url, &ca, &pki.file("good.crt"), &pki.file("good.key"));
    assert!(ok.status.success(), "{}", stderr(&ok));
    assert!(stderr(&ok).contains("termvel: following"), "{}", stderr(&ok));
    let summary = parse_lines(&stdout(&ok)).pop().unwrap();
    assert_eq!(summary["summary"]["follow"]["link_losses"], 0, "{summary}");

    let cases = [
        ("expired", "old", ca.as_str(), "refused this station's certificate: expired"),
        ("unknown CA", "stranger", ca.as_str(), "signed by a CA it does not know"),
        ("broker not signed by --ca", "good", other.as_str(), "broker's certificate is not signed by the CA given"),
    ];
    for (what, cert, ca_file, said) in cases {
        let (out, took) =
            follow_tls(&url, ca_file, &pki.file(&format!("{cert}.crt")), &pki.file(&format!("{cert}.key")));
        let err = stderr(&out);
        eprintln!("{what}: {err}");
        assert_eq!(out.status.code(), Some(1), "{what}: {err}");
        assert!(err.contains(said), "{what}: {err}");
        assert!(!err.contains("following"), "{what}: never subscribed: {err}");
        assert!(took < Duration::from_secs(10), "{what}: said at once, not retried ({took:?})");
    }
    let none = termvel(&["follow", &url, "--headless", "--for", "2s", "--ca", &ca]);
    assert_eq!(none.status.code(), Some(1), "{}", stderr(&none));
    assert!(stderr(&none).contains("TLS: the broker refused the handshake"), "{}", stderr(&none));

    let share = |cert: &str, ca: &str| {
        termvel(&[
            "rehearse",
            "--headless",
            "--as-fast-as-possible",
            "--no-record",
            "--share",
            &url,
            "--share-ca",
            ca,
            "--share-cert",
            &pki.file(&format!("{cert}.crt")),
            "--share-key",
            &pki.file(&format!("{cert}.key")),
        ])
    };
    let run = share("good", &ca);
    assert!(run.status.success(), "{}", stderr(&run));
    let summary = parse_lines(&stdout(&run)).pop().unwrap();
    assert_eq!(summary["share"]["connections"], 1, "{}", summary["share"]);
    for (cert, ca_file, said) in [
        ("old", ca.as_str(), "refused this station's certificate: expired"),
        ("good", other.as_str(), "broker's certificate is not signed by the CA given"),
    ] {
        let run = share(cert, ca_file);
        assert_eq!(run.status.code(), Some(0), "the local run goes on: {}", stderr(&run));
        assert!(stderr(&run).contains("share link down"), "{}", stderr(&run));
        assert!(stderr(&run).contains(said), "{}", stderr(&run));
        let summary = parse_lines(&stdout(&run)).pop().unwrap();
        assert_eq!(summary["share"]["connections"], 0, "{}", summary["share"]);
    }

    // A key others can read is refused before anything runs.
    let exposed = pki.file("exposed.key");
    std::fs::copy(pki.file("good.key"), &exposed).unwrap();
    std::fs::set_permissions(&exposed, std::os::unix::fs::PermissionsExt::from_mode(0o644)).unwrap();
    let out = termvel(&["follow", &url, "--headless", "--ca", &ca, "--cert", &pki.file("good.crt"), "--key", &exposed]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(stderr(&out).contains("can be read by others"), "{}", stderr(&out));
}

/// A follower with its standard input open for commands, its lines
/// (stdout, parsed) and stderr lines read as they come.
struct Sender {
    child: Child,
    stdin: Option<ChildStdin>,
    lines: mpsc::Receiver<Value>,
    err: mpsc::Receiver<String>,
    err_seen: Vec<String>,
}

impl Sender {
    fn start(url: &str, topic: &str, credentials: &str) -> Sender {
        let mut child = Command::new(env!("CARGO_BIN_EXE_termvel"))
            .args(["follow", url, "--topic", topic, "--headless", "--send-from-stdin", "--for", "120s"])
            .args(["--credentials", credentials])
            .current_dir(root())
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let (tx, lines) = mpsc::channel();
        let out = child.stdout.take().unwrap();
        std::thread::spawn(move || {
            for l in BufReader::new(out).lines().map_while(Result::ok) {
                let _ = tx.send(serde_json::from_str(&l).unwrap_or_else(|e| panic!("{e}: {l}")));
            }
        });
        let (tx, err) = mpsc::channel();
        let e = child.stderr.take().unwrap();
        std::thread::spawn(move || {
            for l in BufReader::new(e).lines().map_while(Result::ok) {
                let _ = tx.send(l);
            }
        });
        let stdin = child.stdin.take();
        let mut s = Sender { child, stdin, lines, err, err_seen: Vec::new() };
        s.wait_err("termvel: following", Duration::from_secs(20));
        s
    }

    fn send(&mut self, line: &str) {
        let stdin = self.stdin.as_mut().unwrap();
        writeln!(stdin, "{line}").unwrap();
        stdin.flush().unwrap();
    }

    /// Waits for a stderr line containing `what`.
    fn wait_err(&mut self, what: &str, within: Duration) -> String {
        if let Some(l) = self.err_seen.iter().find(|l| l.contains(what)) {
            return l.clone();
        }
        let until = Instant::now() + within;
        loop {
            let left = until.saturating_duration_since(Instant::now());
            let l = self
                .err
                .recv_timeout(left)
                .unwrap_or_else(|_| panic!("no \"{what}\" within {within:?}: {:?}", self.err_seen));
            self.err_seen.push(l.clone());
            if l.contains(what) {
                return l;
            }
        }
    }

    /// Waits for a stdout message `pred` takes; the messages before it are kept.
    fn wait_for(&mut self, seen: &mut Vec<Value>, within: Duration, pred: impl Fn(&Value) -> bool) -> Value {
        let until = Instant::now() + within;
        loop {
            let left = until.saturating_duration_since(Instant::now());
            let v = self.lines.recv_timeout(left).expect("the awaited message came");
            seen.push(v.clone());
            if pred(&v) {
                return v;
            }
        }
    }

    /// Every stdout message and stderr line until it ends.
    fn finish(mut self, mut seen: Vec<Value>) -> (Vec<Value>, Vec<String>) {
        drop(self.stdin.take());
        let status = self.child.wait().unwrap();
        seen.extend(self.lines.iter());
        self.err_seen.extend(self.err.iter());
        assert!(status.success(), "{:?}", self.err_seen);
        (seen, self.err_seen)
    }
}

/// A broker with a password file (station, pit-eng, watcher) and an ACL:
/// everyone may read the run, the station may publish it and read the
/// control topics, and only pit-eng may send (as itself).
fn broker_with_acl() -> Broker {
    Broker::start_with(|dir| {
        let file = dir.join("passwords");
        for (i, (user, pw)) in [("station", "st-pw"), ("pit-eng", "eng-pw"), ("watcher", "w-pw")].iter().enumerate() {
            let mut c = Command::new("mosquitto_passwd");
            c.arg("-b");
            if i == 0 {
                c.arg("-c");
            }
            let ok = c.arg(&file).args([user, pw]).status().expect("mosquitto_passwd runs (mosquitto package)");
            assert!(ok.success());
        }
        let acl = dir.join("acl");
        std::fs::write(
            &acl,
            "pattern read pit/#\n\nuser station\ntopic readwrite pit/#\n\nuser pit-eng\ntopic write pit/control/pit-eng\n",
        )
        .unwrap();
        format!("allow_anonymous false\npassword_file {}\nacl_file {}\n{}", file.display(), acl.display(), stay_root())
    })
}

fn credentials(dir: &Path, user: &str, password: &str) -> String {
    use std::os::unix::fs::PermissionsExt;
    let p = dir.join(format!("{user}.toml"));
    std::fs::write(&p, format!("username = \"{user}\"\npassword = \"{password}\"\n")).unwrap();
    std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o600)).unwrap();
    p.to_string_lossy().into_owned()
}

/// A rehearsal publishing with `--share-accept-control`, its stdout and
/// stderr read as they come (a full pipe would stall the run).
fn accepting_rehearsal(url: &str, topic: &str, extra: &[&str]) -> (Child, Outputs) {
    let mut run = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["rehearse", "--headless", "--speed", "4", "--share", url, "--share-topic", topic])
        .arg("--share-accept-control")
        .args(extra)
        .current_dir(root())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let err = run.stderr.take().unwrap();
    let err = std::thread::spawn(move || std::io::read_to_string(err).unwrap());
    let out = run.stdout.take().unwrap();
    let out = std::thread::spawn(move || std::io::read_to_string(out).unwrap());
    (run, Outputs { out, err })
}

/// A child's stdout and stderr, read whole by two threads.
struct Outputs {
    out: std::thread::JoinHandle<String>,
    err: std::thread::JoinHandle<String>,
}

impl Outputs {
    fn join(self) -> (String, String) {
        (self.out.join().unwrap(), self.err.join().unwrap())
    }
}

// Issue 16, items 2 and 4: with an ACL, a named engineer's acknowledgement
// and mark reach the reading station, which records them with who sent
// them and answers; a watcher without write permission sends the same
// acknowledgement first: the broker drops it without a word, nothing
// reaches the reading station, and the watcher is told no answer came.
#[test]
fn an_acl_lets_a_named_engineer_acknowledge_and_a_watcher_only_watch() {
    let _one = one_at_a_time();
    let broker = broker_with_acl();
    let url = broker.url();
    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("rec");
    std::fs::create_dir(&rec).unwrap();
    let station = credentials(dir.path(), "station", "st-pw");
    let mut engineer = Sender::start(&url, "pit", &credentials(dir.path(), "pit-eng", "eng-pw"));
    let mut watcher = Sender::start(&url, "pit", &credentials(dir.path(), "watcher", "w-pw"));
    let (mut run, run_out) =
        accepting_rehearsal(&url, "pit", &["--record-dir", rec.to_str().unwrap(), "--share-credentials", &station]);
    let mut seen = Vec::new();
    engineer.wait_for(&mut seen, Duration::from_secs(60), |v| {
        kind_of(v) == "alert_change" && v["change"] == "raised" && v["alert"]["key"] == "derating"
    });
    watcher.send("ack derating");
    let no_answer = watcher.wait_err("no answer from the reading station", Duration::from_secs(10));
    assert!(no_answer.contains("\"ack derating\""), "{no_answer}");
    engineer.send("ack derating");
    engineer.send("mark boost felt late");
    engineer.send("ack no-such-alert");
    engineer.wait_err("accepted \"ack derating\"", Duration::from_secs(10));
    engineer.wait_err("accepted \"mark boost felt late\"", Duration::from_secs(10));
    let refused = engineer.wait_err("refused \"ack no-such-alert\"", Duration::from_secs(10));
    assert!(refused.contains("no alert no-such-alert is shown"), "{refused}");

    assert!(run.wait().unwrap().success());
    let (out, run_err) = run_out.join();
    let summary = parse_lines(&out).pop().unwrap();
    let control = &summary["share"]["control"];
    eprintln!("reading station: {control}");
    assert_eq!(control["acks_accepted"], 1, "{control}");
    assert_eq!(control["marks_accepted"], 1, "{control}");
    assert_eq!(control["refused"], 1, "only the engineer's unknown alert; the watcher's never came: {control}");
    assert!(run_err.contains("accepted from pit-eng: ack derating"), "{run_err}");
    assert!(!run_err.contains("watcher"), "nothing from the watcher reached the station: {run_err}");

    let (got, _) = engineer.finish(seen);
    let acked =
        got.iter().any(|v| kind_of(v) == "alert_change" && v["change"] == "acked" && v["alert"]["key"] == "derating");
    assert!(acked, "the acknowledgement shows to every follower");
    let (_, watcher_err) = watcher.finish(Vec::new());
    assert!(!watcher_err.iter().any(|l| l.contains("accepted")), "{watcher_err:?}");

    // Recorded as a local key would make it, with who sent it.
    let recording = std::fs::read_dir(&rec).unwrap().next().unwrap().unwrap().path();
    let text = String::from_utf8_lossy(&std::fs::read(&recording).unwrap()).into_owned();
    let ack = text.lines().position(|l| l.ends_with(" ack derating")).expect("the ack is recorded");
    let who = text.lines().position(|l| l.ends_with(" mark remote: pit-eng acknowledged derating"));
    assert!(who.is_some_and(|w| w > ack), "a mark after the ack names who sent it");
    assert!(text.lines().any(|l| l.ends_with(" mark remote: pit-eng: boost felt late")));
    let acks = text.lines().filter(|l| l.contains(" ack ") && !l.contains(" note ")).count();
    assert_eq!(acks, 1, "the watcher's acknowledgement is not in the recording");
}

// Issue 16, item 2: hostile control messages (oversized, invalid JSON, an
// unknown alert, escape sequences, a sender named in the payload, another
// schema) are each refused, counted by reason, said on stderr without
// their escapes, and answered; the run ends normally with every snapshot.
#[test]
fn hostile_control_messages_are_refused_counted_and_reported() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    let follower = Follower::start(&url, "pit/h", &["--for", "120s"]);
    let (mut run, run_out) = accepting_rehearsal(&url, "pit/h", &["--no-record"]);
    // The station is connected (and subscribed) once a snapshot comes.
    let first = Command::new("mosquitto_sub")
        .args(["-h", "127.0.0.1", "-p", &broker.port.to_string(), "-t", "pit/h/snapshot", "-C", "1", "-W", "30"])
        .output()
        .expect("mosquitto_sub runs (mosquitto-clients)");
    assert!(first.status.success(), "a snapshot came within 30 s");
    std::thread::sleep(Duration::from_millis(300));
    let dir = tempfile::tempdir().unwrap();
    let big = dir.path().join("big.json");
    std::fs::write(&big, format!("{{\"schema\":1,\"kind\":\"mark\",\"note\":\"{}\"}}", "x".repeat(8000))).unwrap();
    let port = broker.port.to_string();
    let publish = |args: &[&str]| {
        let ok = Command::new("mosquitto_pub")
            .args(["-h", "127.0.0.1", "-p", &port, "-q", "1", "-t", "pit/h/control/mallory"])
            .args(args)
            .status()
            .expect("mosquitto_pub runs (mosquitto-clients)");
        assert!(ok.success());
    };
    publish(&["-f", big.to_str().unwrap()]);
    publish(&["-m", "ack target"]);
    publish(&["-m", r#"{"schema":1,"kind":"ack","key":"no-such-alert","id":3}"#]);
    publish(&["-m", r#"{"schema":1,"kind":"mark","note":"\u001b[2J\u001b]0;owned\u0007"}"#]);
    publish(&["-m", r#"{"schema":1,"kind":"ack","key":"target","from":"director"}"#]);
    publish(&["-m", r#"{"schema":9,"kind":"ack","key":"target"}"#]);
    assert!(run.wait().unwrap().success());
    let (out, run_err) = run_out.join();
    let lines = parse_lines(&out);
    let (summary, snaps) = lines.split_last().unwrap();
    let control = &summary["share"]["control"];
    eprintln!("reading station: {control}");
    assert_eq!(control["refused"], 6, "{control}");
    for reason in ["too_large", "not_json", "unknown_alert", "control_character", "sender_in_payload", "schema"] {
        assert_eq!(control["refused_by_reason"][reason], 1, "{reason}: {control}");
    }
    assert_eq!((control["acks_accepted"].as_u64(), control["marks_accepted"].as_u64()), (Some(0), Some(0)));
    assert_eq!(summary["summary"]["snapshots"].as_u64(), Some(snaps.len() as u64), "every snapshot printed");
    assert_eq!(run_err.matches("refused a control message on pit/h/control/mallory").count(), 6, "{run_err}");
    assert!(!run_err.contains('\u{1b}'), "no escape reaches the station's terminal");
    assert!(!summary.to_string().contains("director"), "the spoofed sender is not taken or echoed");

    let got = follower.finish(Duration::from_secs(60));
    let answers: Vec<&Value> = got.iter().filter(|v| kind_of(v) == "control_answer").collect();
    assert_eq!(answers.len(), 6, "each is answered");
    assert!(answers.iter().all(|a| a["to"] == "mallory" && a["accepted"] == false));
    assert!(answers.iter().any(|a| a["id"] == 3 && a["reason"] == "unknown_alert"), "{answers:?}");
}

// Issue 16, item 5: `--share` started before the recording was opened,
// so a run refused for its recording left the broker a retained `online`
// (or its last will, `offline`) for a run that never was. Now nothing is
// published.
#[test]
fn a_run_refused_for_its_recording_publishes_nothing() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    let dir = tempfile::tempdir().unwrap();
    let not_a_dir: PathBuf = dir.path().join("a-file");
    std::fs::write(&not_a_dir, "").unwrap();
    let run = termvel(&[
        "rehearse",
        "--headless",
        "--share",
        &url,
        "--share-topic",
        "pit/norec",
        "--record-dir",
        not_a_dir.to_str().unwrap(),
    ]);
    assert_eq!(run.status.code(), Some(2), "{}", stderr(&run));
    assert!(stderr(&run).contains("cannot create a recording"), "{}", stderr(&run));
    assert!(!stderr(&run).contains("sharing to"), "{}", stderr(&run));
    let late = Follower::start(&url, "pit/norec", &["--for", "2s"]);
    let got = late.finish(Duration::from_secs(20));
    assert!(!got.iter().any(|v| kind_of(v) == "status" || kind_of(v) == "description"), "{got:?}");
}
