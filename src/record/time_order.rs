//! Putting a recorded stream's times in order, and saying what that took.
//!
//! A file's events are applied in the order of their times, and the engine
//! emits a snapshot only when time moves forward: one event stamped 55 hours
//! late would leave every later event "in the past" and the rest of the run
//! without snapshots, report rows or export rows. So the reader passes its
//! events through this stage, which tells three faults apart:
//!
//! - **An isolated jump**: an event (or up to [`MAX_SUSPECTS`] in a row)
//!   whose time disagrees by more than [`DISAGREE_NS`] with the events on
//!   both sides of it, which agree with each other (a bit flip, a clock
//!   glitch). The event is kept and applied at the time of the event before
//!   it (at the time of the event after it when it opens the file), and
//!   counted with its line.
//! - **A gap**: time moves forward by more than [`DISAGREE_NS`] and the
//!   events after it agree with the new time (a real silence). Kept as it
//!   is; the longest is reported.
//! - **Time going back**: an event earlier than the one before it. Within
//!   [`REORDER_WINDOW_NS`] (logs merged from several interfaces, a live
//!   session's queued events) the events are put back in time order; further
//!   back, they are applied in file order. Both are counted, the first with
//!   its line.
//!
//! A stream this stage reads clean passes through unchanged, so a copy of
//! it (a replay's own recording, a rewritten file) reads back exactly. A
//! stream it had to repair may be repaired differently when its copy is
//! read again (the re-timed events and far reversals now sit in other
//! windows); every event still comes back, and the second read says what
//! it repaired (`fuzz/fuzz_targets/recording.rs` checks both).
//!
//! Memory is bounded: at most [`MAX_SUSPECTS`] events wait for a decision
//! and at most [`REORDER_MAX_EVENTS`] in the window.

use std::collections::VecDeque;

use crate::event::{Event, NS_PER_S, TimeNs};

/// Two times further apart than this disagree.
pub const DISAGREE_NS: TimeNs = 2 * NS_PER_S;
/// Most events in a row that can be an isolated jump; more that agree with
/// neither side are applied as they are, in file order.
pub const MAX_SUSPECTS: usize = 4;
/// Events less than this far back are put back in time order.
pub const REORDER_WINDOW_NS: TimeNs = 50 * NS_PER_S / 1000;
/// Most events held for reordering (a bound on memory at very high rates).
pub const REORDER_MAX_EVENTS: usize = 8192;

/// One event's time and where it was: a line of the file and a signed time
/// step (ns).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct TimeStep {
    pub line: u64,
    pub step_ns: TimeNs,
}

/// What putting the times in order found.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct TimeOrderStats {
    /// Events whose time disagreed with both neighbours, applied at the time
    /// of the event before them.
    pub isolated_jumps: u64,
    /// The first: its line, and how far its own time was from the time it
    /// was applied at (positive: ahead).
    pub first_isolated_jump: Option<TimeStep>,
    /// Forward steps longer than [`DISAGREE_NS`] that the events after them
    /// confirm.
    pub gaps: u64,
    /// The longest, at the line of the event after the silence.
    pub longest_gap: Option<TimeStep>,
    /// Events earlier than the event before them (after isolated jumps are
    /// put right).
    pub time_reversals: u64,
    /// The first: its line, and how far back (positive ns).
    pub first_reversal: Option<TimeStep>,
    /// Of the reversals, those put back in time order (within the window).
    pub reordered: u64,
    /// Events applied earlier than an event applied before them: the
    /// reversals further back than the window.
    pub applied_out_of_order: u64,
}

impl TimeOrderStats {
    /// Nothing to say.
    pub fn is_clean(&self) -> bool {
        self.isolated_jumps == 0 && self.gaps == 0 && self.time_reversals == 0
    }

    /// One line per finding, each opening with `file:line: `, for stderr and
    /// the text of a report.
    pub fn describe(&self, file: &str) -> Vec<String> {
        let mut out = Vec::new();
        if let Some(j) = self.first_isolated_jump {
            out.push(format!(
                "{file}:{}: one event's time jumps {:+.3} s from both its neighbours ({} such in all); applied at the time of the event before it",
                j.line,
                j.step_ns as f64 * 1e-9,
                self.isolated_jumps
            ));
        }
        if let Some(g) = self.longest_gap {
            out.push(format!(
                "{file}:{}: a gap of {:.3} s in the stream, the longest of {} over {} s; shown as a gap",
                g.line,
                g.step_ns as f64 * 1e-9,
                self.gaps,
                DISAGREE_NS / NS_PER_S
            ));
        }
        if let Some(r) = self.first_reversal {
            out.push(format!(
                "{file}:{}: time goes back {:.3} s from the event before ({} such events in all); {} within {} ms put back in time order, {} applied in file order",
                r.line,
                r.step_ns as f64 * 1e-9,
                self.time_reversals,
                self.reordered,
                REORDER_WINDOW_NS * 1000 / NS_PER_S,
                self.applied_out_of_order
            ));
        }
        out
    }
}

/// The ordering stage: events in with their line, events out in order.
#[derive(Clone, Debug, Default)]
pub struct TimeOrder {
    /// Time of the last event accepted (file order, jumps put right).
    clock: Option<TimeNs>,
    /// Events whose time disagrees with the clock, waiting for the next
    /// event to say whether they are isolated.
    suspects: Vec<(Event, u64)>,
    /// Accepted events, in time order, not yet released.
    window: VecDeque<(Event, u64)>,
    /// Latest time in the window.
    newest: Option<TimeNs>,
    /// Released, ready to hand out.
    ready: VecDeque<(Event, u64)>,
    /// Time of the last event handed out.
    last_out: Option<TimeNs>,
    pub stats: TimeOrderStats,
}

fn agree(a: TimeNs, b: TimeNs) -> bool {
    a.abs_diff(b) <= DISAGREE_NS as u64
}

impl TimeOrder {
    /// Events taken and not yet handed out.
    pub fn held(&self) -> usize {
        self.suspects.len() + self.window.len() + self.ready.len()
    }

    /// Takes the next event of the file (at `line`).
    pub fn push(&mut self, ev: Event, line: u64) {
        let t = ev.t_ns;
        if self.clock.is_some_and(|c| agree(t, c)) {
            // Any suspects disagree with both sides: isolated.
            self.decide(None);
            self.accept(ev, line);
        } else if let Some(k) = self.suspects.iter().rposition(|(s, _)| agree(t, s.t_ns)) {
            // Time really moved at suspect `k`.
            self.decide(Some(k));
            self.accept(ev, line);
        } else if self.suspects.len() >= MAX_SUSPECTS {
            // No pattern: the file's order stands.
            for (s, l) in std::mem::take(&mut self.suspects) {
                self.accept(s, l);
            }
            self.push(ev, line);
        } else {
            // Disagrees with what came before (or opens the file): wait for
            // the next event to confirm it.
            self.suspects.push((ev, line));
        }
    }

    /// Applies the waiting suspects once the next event has agreed with the
    /// clock (`None`) or with suspect `k`: suspect `k`, and those before it
    /// that agree with it, are real; the others are isolated jumps, applied
    /// at the time of the event before them (of suspect `k` when nothing
    /// came before).
    fn decide(&mut self, k: Option<usize>) {
        let suspects = std::mem::take(&mut self.suspects);
        let anchor = k.map(|k| suspects[k].0.t_ns);
        for (i, (mut s, l)) in suspects.into_iter().enumerate() {
            let real = k.is_some_and(|k| i == k || (i < k && anchor.is_some_and(|a| agree(s.t_ns, a))));
            if !real {
                let t_ns = self.clock.or(anchor).expect("a clock or an anchor");
                self.stats.isolated_jumps += 1;
                if self.stats.first_isolated_jump.is_none() {
                    self.stats.first_isolated_jump = Some(TimeStep { line: l, step_ns: s.t_ns - t_ns });
                }
                s.t_ns = t_ns;
            }
            self.accept(s, l);
        }
    }

    /// The end of the file: what waits is applied as it is (a jump that
    /// nothing follows cannot be told from a gap) and the window released.
    pub fn finish(&mut self) {
        for (s, l) in std::mem::take(&mut self.suspects) {
            self.accept(s, l);
        }
        while let Some((ev, line)) = self.window.pop_front() {
            self.release(ev, line);
        }
        self.newest = None;
    }

    /// The next event in order, if one is ready.
    pub fn pop(&mut self) -> Option<Event> {
        self.pop_with_line().map(|(e, _)| e)
    }

    /// The next event in order with the line it came from.
    pub fn pop_with_line(&mut self) -> Option<(Event, u64)> {
        self.ready.pop_front()
    }

    fn accept(&mut self, ev: Event, line: u64) {
        if let Some(c) = self.clock {
            if ev.t_ns < c {
                self.stats.time_reversals += 1;
                if self.stats.first_reversal.is_none() {
                    self.stats.first_reversal = Some(TimeStep { line, step_ns: c - ev.t_ns });
                }
            } else if ev.t_ns - c > DISAGREE_NS {
                self.stats.gaps += 1;
                let gap = ev.t_ns - c;
                if self.stats.longest_gap.is_none_or(|g| gap > g.step_ns) {
                    self.stats.longest_gap = Some(TimeStep { line, step_ns: gap });
                }
            }
        }
        self.clock = Some(ev.t_ns);
        self.window_push(ev, line);
    }

    fn window_push(&mut self, ev: Event, line: u64) {
        let t = ev.t_ns;
        if let Some(n) = self.newest
            && t < n - REORDER_WINDOW_NS
        {
            // Too far back to sort: everything before it goes out first.
            while let Some((e, l)) = self.window.pop_front() {
                self.release(e, l);
            }
            self.newest = None;
        }
        // Stable insertion: after every event at or before `t`.
        let at = self.window.iter().rposition(|(e, _)| e.t_ns <= t).map_or(0, |i| i + 1);
        if at < self.window.len() {
            self.stats.reordered += 1;
        }
        self.window.insert(at, (ev, line));
        let newest = self.newest.map_or(t, |n| n.max(t));
        self.newest = Some(newest);
        while let Some((front, _)) = self.window.front() {
            if front.t_ns + REORDER_WINDOW_NS < newest || self.window.len() > REORDER_MAX_EVENTS {
                let (e, l) = self.window.pop_front().expect("a front");
                self.release(e, l);
            } else {
                break;
            }
        }
    }

    fn release(&mut self, ev: Event, line: u64) {
        if self.last_out.is_some_and(|l| ev.t_ns < l) {
            self.stats.applied_out_of_order += 1;
        }
        self.last_out = Some(ev.t_ns);
        self.ready.push_back((ev, line));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{Payload, SourceId};

    /// Times in ms through the stage; the times out (ms) and the stats.
    fn run(times_ms: &[i64]) -> (Vec<i64>, TimeOrderStats) {
        let mut o = TimeOrder::default();
        let mut out = Vec::new();
        for (i, t) in times_ms.iter().enumerate() {
            o.push(Event::new(t * 1_000_000, SourceId(0), Payload::Tick), i as u64 + 1);
            while let Some(e) = o.pop() {
                out.push(e.t_ns / 1_000_000);
            }
        }
        o.finish();
        while let Some(e) = o.pop() {
            out.push(e.t_ns / 1_000_000);
        }
        (out, o.stats)
    }

    // Issue 13, item 3: one event stamped far ahead left the rest of the run
    // behind the engine's clock.
    #[test]
    fn an_isolated_jump_forward_or_back_is_applied_at_its_neighbours_time() {
        let (out, st) = run(&[1000, 1010, 200_001_020, 1030, 1040]);
        assert_eq!(out, [1000, 1010, 1010, 1030, 1040]);
        assert_eq!(st.isolated_jumps, 1);
        assert_eq!(st.first_isolated_jump, Some(TimeStep { line: 3, step_ns: 200_000_010 * 1_000_000 }));
        assert_eq!((st.time_reversals, st.gaps, st.applied_out_of_order), (0, 0, 0));

        let (out, st) = run(&[50_000, 50_010, 10, 50_030]);
        assert_eq!(out, [50_000, 50_010, 50_010, 50_030]);
        assert_eq!(st.first_isolated_jump.map(|j| j.step_ns), Some(-50_000 * 1_000_000));

        // Two in a row, and one opening the file (applied at the next time).
        let (out, st) = run(&[100_000, 190_000, 5_000, 100_010, 100_020]);
        assert_eq!((out, st.isolated_jumps), (vec![100_000, 100_000, 100_000, 100_010, 100_020], 2));
        let (out, st) = run(&[900_000, 1000, 1010]);
        assert_eq!((out, st.isolated_jumps), (vec![1000, 1000, 1010], 1));
    }

    #[test]
    fn a_gap_that_the_next_events_confirm_is_a_gap() {
        let (out, st) = run(&[1000, 1010, 60_000, 60_010, 60_020]);
        assert_eq!(out, [1000, 1010, 60_000, 60_010, 60_020]);
        assert_eq!((st.gaps, st.isolated_jumps), (1, 0));
        assert_eq!(st.longest_gap, Some(TimeStep { line: 3, step_ns: 58_990 * 1_000_000 }));
    }

    // Issue 13, item 4: out-of-order logs were applied without a word.
    #[test]
    fn small_reversals_are_sorted_and_large_ones_applied_in_file_order_and_counted() {
        let (out, st) = run(&[1000, 1020, 1010, 1030, 1025, 1040]);
        assert_eq!(out, [1000, 1010, 1020, 1025, 1030, 1040]);
        assert_eq!((st.time_reversals, st.reordered, st.applied_out_of_order), (2, 2, 0));
        assert_eq!(st.first_reversal, Some(TimeStep { line: 3, step_ns: 10_000_000 }));

        // Halves swapped: one step back of a second, in file order.
        let (out, st) = run(&[2000, 2100, 2200, 1000, 1100, 1200]);
        assert_eq!(out, [2000, 2100, 2200, 1000, 1100, 1200]);
        assert_eq!((st.time_reversals, st.applied_out_of_order), (1, 1));
        assert_eq!(st.first_reversal.map(|r| r.line), Some(4));

        // Reversed: every event goes back.
        let times: Vec<i64> = (0..200).rev().map(|i| 1000 + i * 10).collect();
        let (out, st) = run(&times);
        assert_eq!(out.len(), 200, "nothing lost");
        assert_eq!(st.time_reversals, 199);
        assert!(st.applied_out_of_order > 0);
        assert!(!st.describe("f").is_empty());
    }
}
