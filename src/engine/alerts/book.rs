//! The alert book: every alert of a run, its latching and acknowledgement,
//! the annotations and the timeline. The families (health, staleness,
//! limits, rules) decide whether a condition holds; the book alone decides
//! what that does to the list.

use super::rules::RuleState;
use super::wording::AlertText;
use crate::config::Severity;
use crate::event::TimeNs;

/// One alert as shown.
#[derive(Clone, Debug, PartialEq)]
pub struct Alert {
    pub key: String,
    pub severity: Severity,
    /// The text in metric (what the recording, the headless JSON and the
    /// report carry): `text` worded with [`AlertText::metric`].
    pub message: String,
    /// The text with its numbers as values, for a reader that words them
    /// in another unit set (the screens).
    pub text: AlertText,
    /// When it was (last) raised.
    pub raised_ns: TimeNs,
    /// Whether its condition holds now.
    pub active: bool,
    pub acked: bool,
}

/// A change, for the timeline of a report.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Transition {
    pub t_ns: TimeNs,
    pub key: String,
    /// `raise`, `clear` or `ack`.
    pub what: &'static str,
    pub severity: Severity,
    pub message: String,
}

/// All alerts of a run.
#[derive(Clone, Debug, Default)]
pub struct AlertBook {
    alerts: Vec<Alert>,
    /// Per configured rule, its duration and hysteresis state (rules.rs).
    pub(super) rules: Vec<RuleState>,
    notes: Vec<(TimeNs, String)>,
    pub timeline: Vec<Transition>,
}

impl AlertBook {
    /// Longest timeline kept (a report lists the first this many changes).
    pub const MAX_TIMELINE: usize = 20_000;

    /// Sets the state of alert `key`: raises it when `on` and not active,
    /// clears it when not `on` and active. The message is refreshed while
    /// active so numbers in it stay current.
    pub fn set(&mut self, t_ns: TimeNs, key: &str, severity: Severity, on: bool, text: impl FnOnce() -> AlertText) {
        let message = || {
            let text = text();
            (text.metric(), text)
        };
        let idx = self.alerts.iter().position(|a| a.key == key);
        match (idx, on) {
            (Some(i), true) => {
                let a = &mut self.alerts[i];
                if !a.active {
                    a.active = true;
                    a.acked = false;
                    a.raised_ns = t_ns;
                    a.severity = severity;
                    (a.message, a.text) = message();
                    let a = a.clone();
                    self.record(t_ns, "raise", &a);
                } else {
                    (a.message, a.text) = message();
                }
            }
            (None, true) => {
                let (message, text) = message();
                let a = Alert {
                    key: key.to_string(),
                    severity,
                    message,
                    text,
                    raised_ns: t_ns,
                    active: true,
                    acked: false,
                };
                self.record(t_ns, "raise", &a);
                self.alerts.push(a);
            }
            (Some(i), false) => {
                if self.alerts[i].active {
                    self.alerts[i].active = false;
                    let a = self.alerts[i].clone();
                    self.record(t_ns, "clear", &a);
                    if a.acked {
                        self.alerts.remove(i);
                    }
                }
            }
            (None, false) => {}
        }
    }

    fn record(&mut self, t_ns: TimeNs, what: &'static str, a: &Alert) {
        let note = match what {
            "raise" => format!("alert raise {} {}: {}", a.severity.as_str(), a.key, a.message),
            _ => format!("alert {what} {}", a.key),
        };
        self.notes.push((t_ns, note));
        if self.timeline.len() < Self::MAX_TIMELINE {
            self.timeline.push(Transition {
                t_ns,
                key: a.key.clone(),
                what,
                severity: a.severity,
                message: a.message.clone(),
            });
        }
    }

    /// Acknowledges `key`, or every alert with `*`. Cleared alerts that are
    /// acknowledged leave the list.
    pub fn ack(&mut self, t_ns: TimeNs, key: &str) {
        let mut i = 0;
        while i < self.alerts.len() {
            if (key == "*" || self.alerts[i].key == key) && !self.alerts[i].acked {
                self.alerts[i].acked = true;
                let a = self.alerts[i].clone();
                self.record(t_ns, "ack", &a);
                if !a.active {
                    self.alerts.remove(i);
                    continue;
                }
            }
            i += 1;
        }
    }

    /// The alerts to show: active or not yet acknowledged, newest first.
    pub fn visible(&self) -> Vec<Alert> {
        let mut v: Vec<Alert> = self.alerts.clone();
        v.sort_by(|a, b| b.raised_ns.cmp(&a.raised_ns).then(b.severity.cmp(&a.severity)).then(a.key.cmp(&b.key)));
        v
    }

    /// Whether `key` is active now.
    pub fn is_active(&self, key: &str) -> bool {
        self.alerts.iter().any(|a| a.key == key && a.active)
    }

    /// Annotations written since the last call.
    pub fn take_notes(&mut self) -> Vec<(TimeNs, String)> {
        std::mem::take(&mut self.notes)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const S: TimeNs = 1_000_000_000;

    #[test]
    fn latched_until_acknowledged() {
        let mut b = AlertBook::default();
        b.set(S, "k", Severity::Alarm, true, || "m".into());
        b.set(2 * S, "k", Severity::Alarm, false, || "m".into());
        assert_eq!(b.visible().len(), 1, "cleared but not acknowledged: still shown");
        assert!(!b.visible()[0].active);
        b.ack(3 * S, "k");
        assert!(b.visible().is_empty());
        let notes: Vec<String> = b.take_notes().into_iter().map(|n| n.1).collect();
        assert_eq!(notes, vec!["alert raise alarm k: m", "alert clear k", "alert ack k"]);
    }

    #[test]
    fn acknowledged_while_active_stays_until_clear() {
        let mut b = AlertBook::default();
        b.set(S, "k", Severity::Caution, true, || "m".into());
        b.ack(2 * S, "*");
        assert!(b.visible()[0].acked);
        b.set(3 * S, "k", Severity::Caution, false, || "m".into());
        assert!(b.visible().is_empty());
        b.set(4 * S, "k", Severity::Caution, true, || "m".into());
        assert!(!b.visible()[0].acked, "a new raise needs a new acknowledgement");
    }
}
