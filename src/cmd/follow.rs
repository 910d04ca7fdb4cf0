//! `termvel follow`: a run shared through an MQTT broker, followed from
//! another station. Headless for now: every message that passes the
//! checks, one JSON line each, then a summary line.

use std::io::Write;
use std::process::ExitCode;
use std::time::Duration;

use crate::cli::FollowArgs;
use crate::share::follower::{self, FollowSettings};
use crate::share::{BrokerUrl, Credentials, Topics};

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
    let settings =
        FollowSettings { url: url.clone(), topics: topics.clone(), credentials, ca: args.ca, say_on_stderr: true };
    let rt = tokio::runtime::Builder::new_current_thread().enable_all().build()?;
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    let mut broken = false;
    let limit = args.for_ns.map(|ns| Duration::from_nanos(ns as u64));
    let result = rt.block_on(follower::follow(
        settings,
        || crate::say!("termvel: following {} under {}/", url.display(), topics.prefix()),
        |m| {
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
    if !broken {
        let _ = writeln!(out, "{}", serde_json::json!({ "summary": { "follow": report.json() } }));
        let _ = out.flush();
    }
    Ok(ExitCode::SUCCESS)
}
