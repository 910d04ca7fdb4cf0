//! Alerts: conditions the engineer must not miss. Each has a key, a
//! severity, a message and the stream time it was first raised; it stays on
//! the list (latched) until acknowledged, even after its condition clears.
//! Every raise, clear and acknowledgement is also written as an annotation
//! line in the recording.

use crate::config::Severity;
use crate::config::alerts::{AlertRule, Comparison};
use crate::event::TimeNs;

/// One alert as shown.
#[derive(Clone, Debug, PartialEq)]
pub struct Alert {
    pub key: String,
    pub severity: Severity,
    pub message: String,
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

#[derive(Clone, Debug, Default)]
struct RuleState {
    since: Option<TimeNs>,
    active: bool,
}

/// All alerts of a run.
#[derive(Clone, Debug, Default)]
pub struct AlertBook {
    alerts: Vec<Alert>,
    rules: Vec<RuleState>,
    notes: Vec<(TimeNs, String)>,
    pub timeline: Vec<Transition>,
}

impl AlertBook {
    /// Longest timeline kept (a report lists the first this many changes).
    pub const MAX_TIMELINE: usize = 20_000;

    /// Sets the state of alert `key`: raises it when `on` and not active,
    /// clears it when not `on` and active. The message is refreshed while
    /// active so numbers in it stay current.
    pub fn set(&mut self, t_ns: TimeNs, key: &str, severity: Severity, on: bool, message: impl FnOnce() -> String) {
        let idx = self.alerts.iter().position(|a| a.key == key);
        match (idx, on) {
            (Some(i), true) => {
                let a = &mut self.alerts[i];
                if !a.active {
                    a.active = true;
                    a.acked = false;
                    a.raised_ns = t_ns;
                    a.severity = severity;
                    a.message = message();
                    let a = a.clone();
                    self.record(t_ns, "raise", &a);
                } else {
                    a.message = message();
                }
            }
            (None, true) => {
                let a = Alert {
                    key: key.to_string(),
                    severity,
                    message: message(),
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

    /// Evaluates the configured rules; `value` gives a channel's or derived
    /// quantity's current value (None when unknown or stale, which holds a
    /// rule where it is).
    pub fn evaluate_rules(&mut self, t_ns: TimeNs, rules: &[AlertRule], value: impl Fn(&str) -> Option<f64>) {
        self.rules.resize(rules.len(), RuleState::default());
        for (i, r) in rules.iter().enumerate() {
            let Some(v) = value(&r.channel) else { continue };
            let st = &mut self.rules[i];
            let (beyond, back) = match r.comparison {
                Comparison::Above(th) => (v > th, v < th - r.hysteresis),
                Comparison::Below(th) => (v < th, v > th + r.hysteresis),
            };
            if beyond {
                let since = *st.since.get_or_insert(t_ns);
                if !st.active && (t_ns - since) as f64 * 1e-9 >= r.for_s {
                    st.active = true;
                }
            } else {
                st.since = None;
                if back {
                    st.active = false;
                }
            }
            let on = st.active;
            let key = format!("rule:{}", r.name);
            self.set(t_ns, &key, r.severity, on, || r.message.clone());
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

    fn rule(cmp: Comparison, for_s: f64, hyst: f64) -> AlertRule {
        AlertRule {
            name: "hot".into(),
            channel: "x".into(),
            comparison: cmp,
            for_s,
            hysteresis: hyst,
            severity: Severity::Caution,
            message: "x hot".into(),
        }
    }

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

    #[test]
    fn rule_duration_and_hysteresis() {
        let rules = [rule(Comparison::Above(100.0), 2.0, 5.0)];
        let mut b = AlertBook::default();
        let at = |b: &mut AlertBook, t: TimeNs, v: f64| b.evaluate_rules(t, &rules, |_| Some(v));
        at(&mut b, 0, 101.0);
        at(&mut b, S, 101.0);
        assert!(!b.is_active("rule:hot"), "not yet held for 2 s");
        at(&mut b, 2 * S, 101.0);
        assert!(b.is_active("rule:hot"));
        at(&mut b, 3 * S, 97.0);
        assert!(b.is_active("rule:hot"), "97 is inside the 5-unit hysteresis");
        at(&mut b, 4 * S, 94.9);
        assert!(!b.is_active("rule:hot"));
        // Below, and an interruption restarts the duration.
        let rules = [rule(Comparison::Below(3.0), 1.0, 0.1)];
        let mut b = AlertBook::default();
        let at = |b: &mut AlertBook, t: TimeNs, v: f64| b.evaluate_rules(t, &rules, |_| Some(v));
        at(&mut b, 0, 2.9);
        at(&mut b, S / 2, 3.05);
        at(&mut b, S, 2.9);
        at(&mut b, 3 * S / 2, 2.9);
        assert!(!b.is_active("rule:hot"));
        at(&mut b, 2 * S, 2.9);
        assert!(b.is_active("rule:hot"));
    }
}
