//! `termvel follow`: a run shared through an MQTT broker, followed from
//! another station. Headless for now: every message that passes the
//! checks, one JSON line each, then a summary line.

use std::io::Write;
use std::process::ExitCode;
use std::time::Duration;

use crate::cli::FollowArgs;
use crate::share::control;
use crate::share::follower::{self, FollowSettings};
use crate::share::{BrokerUrl, Credentials, TlsFiles, Topics};
use std::sync::{Arc, Mutex};

pub fn run(args: FollowArgs) -> anyhow::Result<ExitCode> {
    if !args.headless {
        return super::unusable("follow draws no screens yet: give --headless (JSON lines)");
    }
    let url = match BrokerUrl::parse(&args.url) {
        Ok(u) => u,
        Err(e) => return super::unusable(e),
    };
    let topics = match Topics::new(&args.topic) {
        Ok(t) => t,
        Err(e) => return super::unusable(e),
    };
    let credentials = match Credentials::load(args.credentials.as_deref()) {
        Ok(c) => c,
        Err(e) => return super::unusable(e),
    };
    // --send-from-stdin: the sender is the broker's username (the ACL's %u).
    let sender = match (&credentials, args.send_from_stdin) {
        (Some(c), true) if !control::usable_sender(&c.username) => {
            return super::unusable(format!(
                "--send-from-stdin: the username \"{}\" cannot name a topic level (no '/', '+', '#' or control characters, at most {} bytes)",
                crate::printable::clipped(&c.username, 64),
                control::MAX_SENDER_BYTES
            ));
        }
        (Some(c), true) => Some(c.username.clone()),
        (None, true) => {
            return super::unusable(
                "--send-from-stdin needs a broker username (--credentials, or TERMVEL_SHARE_USERNAME and TERMVEL_SHARE_PASSWORD): the control topic is named after it",
            );
        }
        (_, false) => None,
    };
    let tls = TlsFiles { ca: args.ca, cert: args.cert, key: args.key };
    // The URL with its TLS files, checked before anything runs (exit 2).
    if let Err(e) = url.options("termvel-check", None, &tls) {
        return super::unusable(e);
    }
    let (out_tx, out_rx) = tokio::sync::mpsc::channel(64);
    let settings = FollowSettings {
        url: url.clone(),
        topics: topics.clone(),
        credentials,
        tls,
        say_on_stderr: true,
        outgoing: sender.as_ref().map(|_| out_rx),
    };
    let rt = tokio::runtime::Builder::new_current_thread().enable_all().build()?;
    let awaiting = sender.as_ref().map(|user| {
        let first_id = (crate::share::publisher::unix_ns() / 1_000_000).max(0) as u64;
        Arc::new(Mutex::new(control::Awaiting::new(user, first_id)))
    });
    if let (Some(user), Some(awaiting)) = (&sender, &awaiting) {
        let _guard = rt.enter();
        let (topic, a) = (topics.control(user), awaiting.clone());
        // A thread of its own: reading standard input blocks.
        std::thread::spawn(move || control::send_lines(std::io::stdin().lock(), &topic, &a, &out_tx));
        tokio::spawn(control::say_overdue(awaiting.clone()));
    }
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    let mut broken = false;
    let limit = args.for_ns.map(|ns| Duration::from_nanos(ns as u64));
    let result = rt.block_on(follower::follow(
        settings,
        || crate::say!("termvel: following {} under {}/", url.display(), topics.prefix()),
        |m| {
            if m.kind == crate::share::payload::Kind::ControlAnswer
                && let Some(a) = &awaiting
                && let Some(line) = a.lock().unwrap_or_else(|e| e.into_inner()).answer(m.value)
            {
                crate::say!("{line}");
            }
            // Each line whole and at once, so a reader sees it when it comes.
            if !broken
                && (serde_json::to_writer(&mut out, m.value).is_err()
                    || out.write_all(b"\n").is_err()
                    || out.flush().is_err())
            {
                broken = true;
            }
        },
        async move {
            match limit {
                Some(d) => {
                    tokio::select! {
                        _ = tokio::time::sleep(d) => {}
                        _ = tokio::signal::ctrl_c() => {}
                    }
                }
                None => {
                    let _ = tokio::signal::ctrl_c().await;
                }
            }
        },
    ));
    let report = match result {
        Ok(r) => r,
        Err(e) => {
            crate::say!("termvel: {e}");
            return Ok(ExitCode::from(1));
        }
    };
    for r in &report.refusals {
        crate::say!("termvel: refused a message on {r}");
    }
    let mut follow = report.json();
    if let Some(a) = &awaiting {
        let mut a = a.lock().unwrap_or_else(|e| e.into_inner());
        for line in a.overdue(std::time::Instant::now(), true) {
            crate::say!("{line}");
        }
        follow["control"] = a.json();
    }
    if !broken {
        let _ = writeln!(out, "{}", serde_json::json!({ "summary": { "follow": follow } }));
        let _ = out.flush();
    }
    Ok(ExitCode::SUCCESS)
}
