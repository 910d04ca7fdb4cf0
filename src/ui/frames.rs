//! The screens' sink: a running stream's snapshots and status, published
//! as [`UiFrame`]s through a `watch` channel that keeps only the latest, so
//! a slow screen skips frames and the stream never waits for it.

use std::sync::Arc;

use tokio::sync::watch;

use super::app::UiFrame;
use crate::engine::Snapshot;
use crate::stream::{SnapshotSink, StreamStatus};

/// Publishes the latest snapshot and status to the screens.
pub struct UiSink {
    /// The screens hold the receiver ([`super::run`]); it closes when this
    /// sink, and with it the driver's task, ends.
    tx: watch::Sender<Option<Arc<UiFrame>>>,
    /// The latest snapshot, sent again with a new status.
    last: Option<Arc<Snapshot>>,
}

impl UiSink {
    pub fn new(tx: watch::Sender<Option<Arc<UiFrame>>>) -> UiSink {
        UiSink { tx, last: None }
    }
}

impl SnapshotSink for UiSink {
    fn snapshot(&mut self, snap: Arc<Snapshot>, status: &StreamStatus) {
        self.last = Some(snap.clone());
        let _ = self.tx.send(Some(Arc::new(UiFrame { snapshot: snap, status: status.clone() })));
    }

    fn status(&mut self, status: &StreamStatus) {
        if let Some(s) = &self.last {
            let _ = self.tx.send(Some(Arc::new(UiFrame { snapshot: s.clone(), status: status.clone() })));
        }
    }
}
