//! A bounded queue that never makes its producer wait: when full it drops
//! its oldest item to take the newest, and says so, so the caller counts
//! it. The snapshots waiting for the broker use it (latest wins).

use std::collections::VecDeque;
use std::sync::{Arc, Mutex};

use tokio::sync::Notify;

/// Producer: the driver's sink (any thread). Consumer: the publisher's
/// task, which sees `None` once the producer closed it and it is empty.
pub struct DropOldest<T> {
    state: Mutex<State<T>>,
    notify: Notify,
    capacity: usize,
}

struct State<T> {
    items: VecDeque<T>,
    closed: bool,
}

impl<T> DropOldest<T> {
    pub fn new(capacity: usize) -> Arc<DropOldest<T>> {
        Arc::new(DropOldest {
            state: Mutex::new(State { items: VecDeque::with_capacity(capacity), closed: false }),
            notify: Notify::new(),
            capacity: capacity.max(1),
        })
    }

    /// Adds `item`; returns the oldest item when it had to make room.
    pub fn push(&self, item: T) -> Option<T> {
        let dropped = {
            let mut s = self.state.lock().unwrap_or_else(|e| e.into_inner());
            let dropped = if s.items.len() >= self.capacity { s.items.pop_front() } else { None };
            s.items.push_back(item);
            dropped
        };
        self.notify.notify_one();
        dropped
    }

    /// No more items will come; the consumer drains what is left.
    pub fn close(&self) {
        self.state.lock().unwrap_or_else(|e| e.into_inner()).closed = true;
        self.notify.notify_one();
    }

    /// The next item, waiting for one; `None` once closed and empty.
    pub async fn pop(&self) -> Option<T> {
        loop {
            {
                let mut s = self.state.lock().unwrap_or_else(|e| e.into_inner());
                if let Some(item) = s.items.pop_front() {
                    return Some(item);
                }
                if s.closed {
                    return None;
                }
            }
            // A push between the unlock and here leaves a permit: no wake is lost.
            self.notify.notified().await;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[tokio::test]
    async fn full_drops_the_oldest_and_close_drains() {
        let q = DropOldest::new(2);
        assert_eq!(q.push(1), None);
        assert_eq!(q.push(2), None);
        assert_eq!(q.push(3), Some(1), "the oldest makes room");
        q.close();
        assert_eq!((q.pop().await, q.pop().await, q.pop().await), (Some(2), Some(3), None));
    }

    #[tokio::test]
    async fn a_waiting_consumer_wakes_on_a_push_from_another_thread() {
        let q = DropOldest::new(4);
        let p = q.clone();
        let t = std::thread::spawn(move || {
            std::thread::sleep(std::time::Duration::from_millis(20));
            p.push(7);
        });
        assert_eq!(q.pop().await, Some(7));
        t.join().unwrap();
    }
}
