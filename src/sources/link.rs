//! The link between a live device and the running stream, shared by every
//! live source: the session clock, the bounded channel into the stream,
//! shutdown, reconnection back-off, and link state reported once per change.

use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use tokio::sync::{mpsc, watch};

use crate::event::{Event, LinkState, Payload, SourceId, TimeNs};

/// The sending end of the pipeline's input, held by every source task; the
/// pipeline holds the receiver and ends when told to (or when every source
/// has ended). Bounded: when the pipeline falls behind, `send` waits, so the
/// back-pressure reaches the device's own buffer; nothing is dropped here.
/// Every event sent reaches the recorder.
pub type EventSender = mpsc::Sender<Event>;

/// Capacity of the pipeline's input: a second of a saturated 1 Mbit/s bus
/// ten times over.
pub const INPUT_CAPACITY: usize = 1 << 17;

/// The session's clock: the wall-clock time at the start plus a monotonic
/// elapsed time, so steps of the system clock during a run cannot reorder
/// events. Times are whole microseconds (as SocketCAN and candump), so a
/// recording holds every timestamp exactly.
#[derive(Clone, Copy, Debug)]
pub struct SessionClock {
    start: Instant,
    start_unix_ns: i64,
}

impl SessionClock {
    pub fn start() -> SessionClock {
        let unix = SystemTime::now().duration_since(UNIX_EPOCH).map(|d| d.as_nanos() as i64).unwrap_or(0);
        SessionClock { start: Instant::now(), start_unix_ns: unix - unix % 1000 }
    }

    /// Now, in nanoseconds since the epoch, whole microseconds.
    pub fn now_ns(&self) -> TimeNs {
        let e = self.start.elapsed().as_nanos() as i64;
        self.start_unix_ns + e - e % 1000
    }

    pub fn start_ns(&self) -> TimeNs {
        self.start_unix_ns
    }
}

/// Shutdown signal shared by the session's tasks: `true` means stop.
pub type Shutdown = watch::Receiver<bool>;

/// Exponential back-off between reopening attempts: 100 ms doubling to 2 s.
#[derive(Clone, Debug)]
pub struct Backoff {
    next: Duration,
}

impl Default for Backoff {
    fn default() -> Self {
        Backoff { next: Self::FIRST }
    }
}

impl Backoff {
    pub const FIRST: Duration = Duration::from_millis(100);
    pub const MAX: Duration = Duration::from_secs(2);

    /// The next wait, then doubles it (up to the maximum).
    pub fn next_wait(&mut self) -> Duration {
        let w = self.next;
        self.next = (self.next * 2).min(Self::MAX);
        w
    }

    pub fn reset(&mut self) {
        self.next = Self::FIRST;
    }
}

/// Reports link changes once per change (a source retrying for minutes
/// writes one "retrying" line, not one per attempt).
pub struct Link {
    pub source: SourceId,
    pub clock: SessionClock,
    pub tx: EventSender,
    state: Option<LinkState>,
}

impl Link {
    pub fn new(source: SourceId, clock: SessionClock, tx: EventSender) -> Link {
        Link { source, clock, tx, state: None }
    }

    /// Sends a link event if the state changed; false when the pipeline is gone.
    pub async fn set(&mut self, state: LinkState, reason: impl Into<String>) -> bool {
        if self.state == Some(state) {
            return true;
        }
        self.state = Some(state);
        self.tx.send(Event::new(self.clock.now_ns(), self.source, Payload::Link(state, reason.into()))).await.is_ok()
    }

    /// Reports `state` for `reason` (a source that failed or went away),
    /// then waits out the next back-off: true when the source should end
    /// instead of trying again (shutdown, or the pipeline is gone).
    pub async fn wait_to_retry(
        &mut self,
        state: LinkState,
        reason: impl Into<String>,
        backoff: &mut Backoff,
        stop: &mut Shutdown,
    ) -> bool {
        !self.set(state, reason).await || sleep_or_stop(backoff.next_wait(), stop).await
    }

    /// Sends an event; false when the pipeline is gone.
    pub async fn send(&self, ev: Event) -> bool {
        self.tx.send(ev).await.is_ok()
    }

    /// Sends a batch of events in order, waiting once for room for all of
    /// them (cheaper than one wait each at a saturated bus); empties
    /// `events`. False when the pipeline is gone.
    pub async fn send_all(&self, events: &mut Vec<Event>) -> bool {
        while !events.is_empty() {
            let n = events.len().min(self.tx.max_capacity());
            let Ok(permits) = self.tx.reserve_many(n).await else { return false };
            for (permit, ev) in permits.zip(events.drain(..n)) {
                permit.send(ev);
            }
        }
        true
    }
}

/// Waits `d` or until shutdown; true if shutting down.
pub async fn sleep_or_stop(d: Duration, stop: &mut Shutdown) -> bool {
    if *stop.borrow() {
        return true;
    }
    tokio::select! {
        _ = tokio::time::sleep(d) => *stop.borrow(),
        r = stop.changed() => r.is_err() || *stop.borrow(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn backoff_doubles_to_its_cap() {
        let mut b = Backoff::default();
        let waits: Vec<u64> = (0..7).map(|_| b.next_wait().as_millis() as u64).collect();
        assert_eq!(waits, vec![100, 200, 400, 800, 1600, 2000, 2000]);
        b.reset();
        assert_eq!(b.next_wait(), Duration::from_millis(100));
    }

    #[test]
    fn the_clock_is_whole_microseconds_and_monotonic() {
        let c = SessionClock::start();
        let mut last = c.now_ns();
        for _ in 0..1000 {
            let t = c.now_ns();
            assert_eq!(t % 1000, 0);
            assert!(t >= last);
            last = t;
        }
    }

    #[tokio::test(start_paused = true)]
    async fn sleeping_stops_at_shutdown() {
        let (tx, mut rx) = watch::channel(false);
        let t0 = tokio::time::Instant::now();
        let h = tokio::spawn(async move { sleep_or_stop(Duration::from_secs(60), &mut rx).await });
        tokio::time::advance(Duration::from_millis(10)).await;
        tx.send(true).unwrap();
        assert!(h.await.unwrap(), "woke for the shutdown");
        assert!(t0.elapsed() < Duration::from_secs(1));
    }
}
