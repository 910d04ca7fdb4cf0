//! Arrival-to-applied latency: how late each event reaches the engine
//! (paced: after it was due; live: after it arrived). The drivers write it,
//! the feed screen and the live summary read it.

use std::sync::{Arc, Mutex};

use hdrhistogram::Histogram;

/// Latency in microseconds, shared by a driver (writer) and its readers.
pub type LatencyHistogram = Arc<Mutex<Histogram<u64>>>;

/// A fresh latency histogram: 1 µs to 60 s, 3 significant digits.
pub fn latency_histogram() -> LatencyHistogram {
    Arc::new(Mutex::new(Histogram::new_with_bounds(1, 60_000_000, 3).expect("valid bounds")))
}

/// Records one latency (µs; at least 1, the histogram's floor; beyond its
/// range it saturates).
pub fn record_latency(h: &LatencyHistogram, us: u64) {
    if let Ok(mut h) = h.lock() {
        h.saturating_record(us.max(1));
    }
}
