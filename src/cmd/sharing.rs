//! `--share`: from the options to a running publisher, and its closing
//! line and summary block. The publishing itself is in [`crate::share`].

use serde_json::Value;

use crate::cli::RunOpts;
use crate::config::ConfigSet;
use crate::event::SourceTable;
use crate::share::payload::{self, RunDescription};
use crate::share::publisher::{Publisher, ShareTap, unix_ns};
use crate::share::{BrokerUrl, Credentials, ShareSettings, TlsFiles, Topics};
use crate::stream::Control;
use tokio::sync::mpsc;

/// Starts publishing when `--share` is given (`None` when not); `Err` is
/// the one-line reason the options are unusable. An absent broker is not
/// an error: the run goes on and the link shows down. `controls` is the
/// stream's control channel, where followers' accepted acknowledgements
/// and marks go with `--share-accept-control`. Call it after the recording
/// is open: a run refused after this would leave a retained `online` (or
/// the broker's `offline`) for a run that never was.
pub fn start(
    run: &RunOpts,
    command: &str,
    config: &ConfigSet,
    sources: &SourceTable,
    controls: &mpsc::Sender<Control>,
) -> Result<(Option<ShareTap>, Option<Publisher>), String> {
    let Some(url) = &run.share.share else { return Ok((None, None)) };
    let url = BrokerUrl::parse(url).map_err(|e| e.to_string())?;
    let topics = Topics::new(&run.share.share_topic).map_err(|e| e.to_string())?;
    let credentials = Credentials::load(run.share.share_credentials.as_deref()).map_err(|e| e.to_string())?;
    let mut description = payload::description(&RunDescription {
        config,
        command,
        started_unix_ns: unix_ns(),
        snapshot_every_ns: run.every,
        sources,
    });
    // Whether a follower can rebuild the run on its own engine (and record
    // it): it needs the raw events.
    description["event_batches"] = serde_json::json!(run.share.share_events);
    let settings = ShareSettings {
        url: url.clone(),
        topics: topics.clone(),
        credentials,
        tls: TlsFiles {
            ca: run.share.share_ca.clone(),
            cert: run.share.share_cert.clone(),
            key: run.share.share_key.clone(),
        },
        description,
        say_on_stderr: run.headless,
        events: run.share.share_events,
        control: run.share.share_accept_control.then(|| controls.clone()),
    };
    let (tap, publisher) = Publisher::start(settings).map_err(|e| e.to_string())?;
    crate::say!("termvel: sharing to {} under {}/", url.display(), topics.prefix());
    if run.share.share_accept_control {
        crate::say!(
            "termvel: taking acknowledgements and marks from followers on {} (the broker's ACL says who may send)",
            topics.control_all()
        );
    }
    Ok((Some(tap), Some(publisher)))
}

/// Waits for the publisher to drain, says what was shared on stderr, and
/// gives the summary's `share` block. The tap must be dropped first. This
/// blocks its thread; inside a runtime use [`finish_async`].
pub fn finish(publisher: Option<Publisher>) -> Option<Value> {
    let p = publisher?;
    let (url, topics) = (p.url.clone(), p.topics.clone());
    let stats = p.finish();
    crate::say!("{}", stats.line(&url));
    Some(stats.json(&url, &topics))
}

/// [`finish`] inside a runtime: the wait (up to the drain bound) does not
/// hold one of its workers.
pub async fn finish_async(publisher: Option<Publisher>) -> Option<Value> {
    let p = publisher?;
    let (url, topics) = (p.url.clone(), p.topics.clone());
    let stats = p.finish_async().await;
    crate::say!("{}", stats.line(&url));
    Some(stats.json(&url, &topics))
}

/// What the status line shows of a publisher's link (`None` when not
/// sharing): up or down, and what was not shared so far.
pub fn probe(publisher: &Option<Publisher>) -> Option<crate::ui::app::ShareProbe> {
    use std::sync::atomic::Ordering::Relaxed;
    let stats = publisher.as_ref()?.stats.clone();
    Some(Box::new(move || {
        let not_shared = stats.snapshots_dropped_slow.load(Relaxed)
            + stats.snapshots_dropped_down.load(Relaxed)
            + stats.messages_not_shared.load(Relaxed);
        crate::ui::app::ShareLink {
            up: stats.link_up.load(Relaxed),
            detail: if not_shared > 0 { format!("{not_shared} not shared") } else { String::new() },
        }
    }))
}
