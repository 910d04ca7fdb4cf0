//! Controls: what the screens (or a test, or a signal handler) ask of a
//! running stream. Operator actions and quit apply to every stream;
//! playback controls (pace and position) to finite streams only.

use crate::event::{Event, OPERATOR, Payload, TimeNs};

/// Slowest and fastest paced speeds.
pub const MIN_SPEED: f64 = 0.1;
pub const MAX_SPEED: f64 = 64.0;
/// The speed steps the faster/slower keys move through.
pub const SPEED_STEPS: [f64; 11] = [0.1, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0, f64::INFINITY];

/// A control sent to a running stream. The sender is the UI (or a test, or
/// the signal handler of a headless session); the driver holds the
/// receiver and stops reading it when it ends.
#[derive(Clone, Debug, PartialEq)]
pub enum Control {
    /// An operator action: every stream takes it into the engine and the
    /// recording.
    Operator(Operator),
    /// Pace and position: a finite stream obeys; a live stream cannot, and
    /// answers with its status unchanged.
    Playback(Playback),
    /// End the stream (a finite stream on the screens holds at its end
    /// until told so).
    Quit,
}

/// What the operator adds to a stream, live or not.
#[derive(Clone, Debug, PartialEq)]
pub enum Operator {
    /// A mark with its text.
    Mark(String),
    /// Acknowledge an alert (its key) or all (`*`).
    Ack(String),
}

impl Operator {
    /// The event this action is at stream time `t_ns`.
    pub fn event(self, t_ns: TimeNs) -> Event {
        let payload = match self {
            Operator::Mark(text) => Payload::Mark(text),
            Operator::Ack(key) => Payload::Ack(key),
        };
        Event::new(t_ns, OPERATOR, payload)
    }
}

/// Pace and position of a finite stream.
#[derive(Clone, Debug, PartialEq)]
pub enum Playback {
    TogglePause,
    /// Paced at this factor of real time; `f64::INFINITY` for as fast as possible.
    SetSpeed(f64),
    /// One step up or down [`SPEED_STEPS`].
    Faster,
    Slower,
    /// Seek by a signed amount of stream time.
    SeekBy(TimeNs),
    /// Seek to an absolute stream time.
    SeekTo(TimeNs),
    /// While paused: advance one snapshot interval.
    Step,
}

impl From<Operator> for Control {
    fn from(o: Operator) -> Control {
        Control::Operator(o)
    }
}

impl From<Playback> for Control {
    fn from(p: Playback) -> Control {
        Control::Playback(p)
    }
}

/// `speed` clamped to the paced range, or as fast as possible.
pub fn clamp_speed(speed: f64) -> f64 {
    if speed.is_finite() { speed.clamp(MIN_SPEED, MAX_SPEED) } else { f64::INFINITY }
}

/// The next step of [`SPEED_STEPS`] up (`faster`) or down from `speed`.
pub fn step_speed(speed: f64, faster: bool) -> f64 {
    let i = SPEED_STEPS.iter().position(|s| *s >= speed).unwrap_or(SPEED_STEPS.len() - 1);
    let j = if faster { (i + 1).min(SPEED_STEPS.len() - 1) } else { i.saturating_sub(1) };
    SPEED_STEPS[j]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn speeds_step_and_clamp() {
        assert_eq!(step_speed(1.0, true), 2.0);
        assert_eq!(step_speed(1.0, false), 0.5);
        assert_eq!(step_speed(0.1, false), 0.1);
        assert_eq!(step_speed(64.0, true), f64::INFINITY);
        assert_eq!(step_speed(f64::INFINITY, true), f64::INFINITY);
        assert_eq!(step_speed(f64::INFINITY, false), 64.0);
        // Between steps: up to the next, down to the one below it.
        assert_eq!(step_speed(3.0, true), 8.0);
        assert_eq!(step_speed(3.0, false), 2.0);
        assert_eq!(clamp_speed(1000.0), MAX_SPEED);
        assert_eq!(clamp_speed(0.0), MIN_SPEED);
        assert_eq!(clamp_speed(f64::INFINITY), f64::INFINITY);
    }

    #[test]
    fn operator_actions_are_operator_events() {
        let ev = Operator::Mark("boost on".into()).event(7);
        assert_eq!((ev.t_ns, ev.source, ev.payload), (7, OPERATOR, Payload::Mark("boost on".into())));
        assert_eq!(Operator::Ack("*".into()).event(8).payload, Payload::Ack("*".into()));
    }
}
