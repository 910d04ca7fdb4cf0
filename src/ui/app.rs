//! The screens' state: what is shown, and everything the keys change. State
//! changes only in the handlers here ([`App::on_frame`], [`App::on_key`],
//! [`App::on_tick`]); drawing reads it and changes nothing.

use std::sync::Arc;

use crossterm::event::{KeyCode, KeyEvent, KeyEventKind, KeyModifiers};

use super::format::Units;
use super::theme::Theme;
use crate::config::ConfigSet;
use crate::engine::Snapshot;
use crate::event::{NS_PER_S, TimeNs};
use crate::stream::paced::{ChartHistory, SharedHistory};
use crate::stream::{Control, Operator, Playback, StreamStatus};

/// The screens.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Screen {
    Run,
    Power,
    Battery,
    Feed,
    Channels,
    Help,
}

impl Screen {
    pub const ALL: [Screen; 6] =
        [Screen::Run, Screen::Power, Screen::Battery, Screen::Feed, Screen::Channels, Screen::Help];

    pub fn name(self) -> &'static str {
        match self {
            Screen::Run => "run",
            Screen::Power => "power",
            Screen::Battery => "battery",
            Screen::Feed => "feed",
            Screen::Channels => "channels",
            Screen::Help => "help",
        }
    }

    /// The key that opens it.
    pub fn key(self) -> char {
        match self {
            Screen::Run => '1',
            Screen::Power => '2',
            Screen::Battery => '3',
            Screen::Feed => '4',
            Screen::Channels => '5',
            Screen::Help => '?',
        }
    }
}

/// What kind of session the screens show.
#[derive(Clone, Debug, PartialEq)]
pub enum Mode {
    Replay {
        file: String,
    },
    Rehearsal {
        plan: String,
    },
    Live,
    /// A run shared through a broker, followed read-only (`termvel follow`).
    Follow {
        topic: String,
        /// `a` and `m` are sent to the reading station (`--send-keys`).
        sends: bool,
    },
}

/// The link to a broker as the status line shows it: a publishing
/// station's (`--share`) or a follower's. The command builds it from what
/// its publisher or follower counts; the screens only draw it.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ShareLink {
    pub up: bool,
    /// What was not shared or received, and other words (`3 not shared`,
    /// `station offline`); empty for none.
    pub detail: String,
}

/// Reads the link's state now (called at the frame rate: must be cheap).
pub type ShareProbe = Box<dyn Fn() -> ShareLink + Send>;

/// Fixed facts of the session.
#[derive(Clone, Debug)]
pub struct SessionInfo {
    pub mode: Mode,
    pub config: Arc<ConfigSet>,
}

/// What the player publishes: the latest snapshot and where it is.
#[derive(Clone, Debug)]
pub struct UiFrame {
    pub snapshot: Arc<Snapshot>,
    pub status: StreamStatus,
}

/// Latency figures for the feed screen, read from the shared histogram.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LatencyView {
    pub count: u64,
    pub p50_us: u64,
    pub p99_us: u64,
    pub max_us: u64,
    /// (upper bound µs, count) per power-of-two bucket.
    pub buckets: Vec<(u64, u64)>,
}

/// What a key asks of the outside.
#[derive(Clone, Debug, PartialEq)]
pub enum Action {
    Player(Control),
    /// Write these settings to the settings file (`u` switched the units).
    Remember(super::settings::Settings),
    Quit,
}

/// Ticks a first `q` waits for the second.
pub const QUIT_ARM_TICKS: u32 = 40;
/// What a first `q` says.
pub const QUIT_ASK: &str = "press q again to quit (any other key cancels)";
/// Ticks a transient message stays on the status line.
pub const MESSAGE_TICKS: u32 = 60;
/// Seek steps, ns.
pub const SEEK_SHORT_NS: TimeNs = 5 * NS_PER_S;
pub const SEEK_LONG_NS: TimeNs = 30 * NS_PER_S;

/// The screens' state.
pub struct App {
    pub info: SessionInfo,
    pub theme: Theme,
    pub frame: Option<Arc<UiFrame>>,
    pub screen: Screen,
    pub units: Units,
    /// Channel filter text, and whether keys go to it.
    pub filter: String,
    pub filtering: bool,
    pub scroll: usize,
    /// The text of a mark being typed.
    pub prompt: Option<String>,
    quit_armed: u32,
    pub message: Option<(String, u32)>,
    pub marks_made: u32,
    /// (distance m, speed m/s) behind the car, one point every few metres.
    pub trace: Vec<(f64, f64)>,
    /// (time in boost s, deliverable/rated) measured while boosting.
    pub derating: Vec<(f64, f64)>,
    pub latency: LatencyView,
    /// The stream's chart history, kept by a finite stream's player from
    /// every snapshot (so it is a straight run's after any seek); `None`
    /// live, where the app keeps its own from the frames it sees.
    pub history: Option<SharedHistory>,
    own_history: ChartHistory,
    /// The CAN bus load of the signal map (config alone), for the feed screen.
    pub bus_load: crate::decode::busload::BusLoad,
    /// The share link's probe, when the run is shared or followed.
    pub share_probe: Option<ShareProbe>,
    /// The share link as last read, and since when (Unix s) it is up or down.
    pub share: Option<(ShareLink, i64)>,
}

impl App {
    pub fn new(info: SessionInfo, theme: Theme) -> App {
        App {
            bus_load: crate::decode::busload::bus_load(&info.config.signals),
            info,
            theme,
            frame: None,
            screen: Screen::Run,
            units: Units::Metric,
            filter: String::new(),
            filtering: false,
            scroll: 0,
            prompt: None,
            quit_armed: 0,
            message: None,
            marks_made: 0,
            trace: Vec::new(),
            derating: Vec::new(),
            latency: LatencyView::default(),
            history: None,
            own_history: ChartHistory::default(),
            share_probe: None,
            share: None,
        }
    }

    /// The share link for the status line (`share ▲ up`, `share ▼ down
    /// since 14:03:07Z`, and what was not shared), if the run is shared.
    pub fn share_text(&self) -> Option<String> {
        let (l, since) = self.share.as_ref()?;
        let (_, _, _, h, m, s) = crate::civil_time::utc_parts(*since);
        let mut t =
            if l.up { "share ▲ up".to_string() } else { format!("share ▼ down since {h:02}:{m:02}:{s:02}Z") };
        if !l.detail.is_empty() {
            t.push_str(" · ");
            t.push_str(&l.detail);
        }
        Some(t)
    }

    /// The link's state alone, for a narrow status line.
    pub fn share_short(&self) -> Option<String> {
        let (l, since) = self.share.as_ref()?;
        let (_, _, _, h, m, s) = crate::civil_time::utc_parts(*since);
        Some(if l.up { "share ▲".to_string() } else { format!("share ▼ {h:02}:{m:02}:{s:02}Z") })
    }

    pub fn snapshot(&self) -> Option<&Snapshot> {
        self.frame.as_deref().map(|f| &*f.snapshot)
    }

    pub fn status(&self) -> Option<&StreamStatus> {
        self.frame.as_deref().map(|f| &f.status)
    }

    /// A new snapshot: keep it and take the histories the charts draw up
    /// to its time.
    pub fn on_frame(&mut self, f: Arc<UiFrame>) {
        let t_ns = f.snapshot.t_ns;
        match &self.history {
            Some(shared) => {
                let h = shared.lock().unwrap_or_else(|e| e.into_inner());
                Self::take_history(&h, t_ns, &mut self.trace, &mut self.derating);
            }
            None => {
                if self.frame.as_ref().is_none_or(|old| !Arc::ptr_eq(&old.snapshot, &f.snapshot)) {
                    self.own_history.push(&f.snapshot);
                }
                let h = &self.own_history;
                Self::take_history(h, t_ns, &mut self.trace, &mut self.derating);
            }
        }
        self.frame = Some(f);
    }

    /// Copies the history up to `t_ns`: only what is new, unless the
    /// copy runs past `t_ns` (a seek back). The history only ever grows
    /// (it is a straight run's), so what was copied stays right.
    fn take_history(h: &ChartHistory, t_ns: TimeNs, trace: &mut Vec<(f64, f64)>, derating: &mut Vec<(f64, f64)>) {
        let upto = h.trace.partition_point(|p| p.0 <= t_ns);
        if trace.len() > upto {
            trace.truncate(upto);
        }
        let from = trace.len();
        trace.extend(h.trace[from..upto].iter().map(|p| (p.1, p.2)));
        *derating = h.derating_until(t_ns);
    }

    /// A clock tick (the frame rate): age the transient state.
    pub fn on_tick(&mut self) {
        if let Some(probe) = &self.share_probe {
            let now = probe();
            let unix_s =
                std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_secs() as i64);
            let since = match &self.share {
                Some((old, since)) if old.up == now.up => *since,
                _ => unix_s,
            };
            self.share = Some((now, since));
        }
        self.quit_armed = self.quit_armed.saturating_sub(1);
        if let Some((_, n)) = &mut self.message {
            *n = n.saturating_sub(1);
            if *n == 0 {
                self.message = None;
            }
        }
    }

    fn say(&mut self, text: impl Into<String>) {
        self.message = Some((text.into(), MESSAGE_TICKS));
    }

    /// A key press. Returns what the outside must do.
    pub fn on_key(&mut self, key: KeyEvent) -> Vec<Action> {
        if key.kind == KeyEventKind::Release {
            return vec![];
        }
        if key.modifiers.contains(KeyModifiers::CONTROL) && key.code == KeyCode::Char('c') {
            return vec![Action::Quit];
        }
        // Any other key between the two `q`s cancels the quit: `q`, a
        // screen key, `q` is two stray keys, not a decision.
        if self.quit_armed > 0 && (key.code != KeyCode::Char('q') || self.prompt.is_some() || self.filtering) {
            self.quit_armed = 0;
            if self.message.as_ref().is_some_and(|m| m.0 == QUIT_ASK) {
                self.message = None;
            }
        }
        // Typing a mark.
        if let Some(text) = &mut self.prompt {
            match key.code {
                KeyCode::Enter => {
                    let text = std::mem::take(text);
                    self.prompt = None;
                    self.marks_made += 1;
                    let text = if text.trim().is_empty() {
                        format!("mark {}", self.marks_made)
                    } else {
                        text.trim().to_string()
                    };
                    let status = self.status();
                    let sends = matches!(self.info.mode, Mode::Follow { sends: true, .. });
                    let said = match status {
                        // A follower's mark is the reading station's to take.
                        _ if sends => format!("mark sent to the reading station: {text}"),
                        Some(st) if st.recording.is_none() => {
                            format!("mark shown, not recorded (no recording is being written): {text}")
                        }
                        Some(st) if st.recorded_to_ns.is_some_and(|r| st.position_ns.is_some_and(|p| p < r)) => {
                            format!("marked: {text} (recorded where the recording has reached, with this place)")
                        }
                        _ => format!("marked: {text}"),
                    };
                    self.say(said);
                    return vec![Action::Player(Control::Operator(Operator::Mark(text)))];
                }
                KeyCode::Esc => {
                    self.prompt = None;
                    self.say("mark cancelled");
                }
                KeyCode::Backspace => {
                    text.pop();
                }
                KeyCode::Char(c) if text.chars().count() < 80 => text.push(c),
                _ => {}
            }
            return vec![];
        }
        // Typing a channel filter.
        if self.filtering {
            match key.code {
                KeyCode::Enter => self.filtering = false,
                KeyCode::Esc => {
                    self.filtering = false;
                    self.filter.clear();
                }
                KeyCode::Backspace => {
                    self.filter.pop();
                }
                KeyCode::Char(c) if self.filter.len() < 40 => {
                    self.filter.push(c);
                    self.scroll = 0;
                }
                _ => {}
            }
            return vec![];
        }
        let followed = matches!(self.info.mode, Mode::Follow { .. });
        let sends = matches!(self.info.mode, Mode::Follow { sends: true, .. });
        if followed && !sends && matches!(key.code, KeyCode::Char('a' | 'm')) {
            self.say("follow: read-only; acknowledge and mark on the reading station (or follow with --send-keys)");
            return vec![];
        }
        if sends && key.code == KeyCode::Char('a') {
            // One acknowledgement per alert shown and not yet acknowledged:
            // the reading station checks each against its own alerts (it
            // takes no "all"); the answers come back on the status line and
            // the acknowledgements in the run's own events.
            let keys: Vec<String> = self
                .snapshot()
                .map(|s| s.alerts.iter().filter(|a| a.active && !a.acked).map(|a| a.key.clone()).collect())
                .unwrap_or_default();
            let n = keys.len();
            self.say(format!(
                "acknowledgement of {n} alert{} sent to the reading station",
                if n == 1 { "" } else { "s" }
            ));
            return keys.into_iter().map(|k| Action::Player(Control::Operator(Operator::Ack(k)))).collect();
        }
        let control = |c: Control| vec![Action::Player(c)];
        let playback = |p: Playback| control(Control::Playback(p));
        let replay_key = matches!(
            key.code,
            KeyCode::Char(' ' | 'p' | '+' | '=' | '-' | '.' | ',' | '>' | '<' | 's') | KeyCode::Left | KeyCode::Right
        );
        // A live or followed run cannot be paused, sped up or sought: say so
        // rather than ignore the key.
        let not_here = match self.info.mode {
            Mode::Follow { .. } => Some("follow: pause, pace, seek and step do not apply to a followed run"),
            Mode::Live => Some("live: pause, pace, seek and step are for replays and rehearsals"),
            _ => None,
        };
        if replay_key && let Some(why) = not_here {
            self.say(why);
            return vec![];
        }
        match key.code {
            KeyCode::Char('q') => {
                if self.quit_armed > 0 {
                    return vec![Action::Quit];
                }
                self.quit_armed = QUIT_ARM_TICKS;
                self.say(QUIT_ASK);
                vec![]
            }
            KeyCode::Char(c @ ('1'..='5' | '?')) => {
                if let Some(s) = Screen::ALL.iter().find(|s| s.key() == c) {
                    self.screen = *s;
                }
                vec![]
            }
            KeyCode::Char('h') => {
                self.screen = Screen::Help;
                vec![]
            }
            // Tab cycles the five data screens (from help it starts over).
            KeyCode::Tab => {
                let i = Screen::ALL[..5].iter().position(|s| *s == self.screen).map_or(0, |i| (i + 1) % 5);
                self.screen = Screen::ALL[i];
                vec![]
            }
            KeyCode::BackTab => {
                let i = Screen::ALL[..5].iter().position(|s| *s == self.screen).map_or(4, |i| (i + 4) % 5);
                self.screen = Screen::ALL[i];
                vec![]
            }
            KeyCode::Char(' ') | KeyCode::Char('p') => playback(Playback::TogglePause),
            KeyCode::Char('+') | KeyCode::Char('=') => playback(Playback::Faster),
            KeyCode::Char('-') => playback(Playback::Slower),
            KeyCode::Right | KeyCode::Char('.') => playback(Playback::SeekBy(SEEK_SHORT_NS)),
            KeyCode::Left | KeyCode::Char(',') => playback(Playback::SeekBy(-SEEK_SHORT_NS)),
            KeyCode::Char('>') => playback(Playback::SeekBy(SEEK_LONG_NS)),
            KeyCode::Char('<') => playback(Playback::SeekBy(-SEEK_LONG_NS)),
            KeyCode::Char('s') => playback(Playback::Step),
            KeyCode::Char('m') => {
                self.prompt = Some(String::new());
                vec![]
            }
            KeyCode::Char('a') => {
                let n = self.snapshot().map_or(0, |s| s.alerts.iter().filter(|a| !a.acked).count());
                self.say(format!("acknowledged {n} alert{}", if n == 1 { "" } else { "s" }));
                control(Control::Operator(Operator::Ack("*".into())))
            }
            KeyCode::Char('u') => {
                // Every figure, chart and alert text follows; the choice
                // is remembered for the next run.
                self.units = self.units.toggle();
                vec![Action::Remember(super::settings::Settings { units: self.units })]
            }
            KeyCode::Char('/') if self.screen == Screen::Channels => {
                self.filtering = true;
                vec![]
            }
            KeyCode::Esc if self.screen == Screen::Channels => {
                self.filter.clear();
                vec![]
            }
            KeyCode::Down | KeyCode::Char('j') => {
                self.scroll = self.scroll.saturating_add(1);
                vec![]
            }
            KeyCode::Up | KeyCode::Char('k') => {
                self.scroll = self.scroll.saturating_sub(1);
                vec![]
            }
            KeyCode::PageDown => {
                self.scroll = self.scroll.saturating_add(10);
                vec![]
            }
            KeyCode::PageUp => {
                self.scroll = self.scroll.saturating_sub(10);
                vec![]
            }
            _ => vec![],
        }
    }

    /// The settings were written (`Ok`, the file) or not: said on the
    /// status line, so a choice that will not last is not a surprise.
    pub fn remembered(&mut self, r: Result<std::path::PathBuf, super::settings::SettingsError>) {
        let units = self.units.name();
        match r {
            Ok(_) => self.say(format!("{units} units (remembered)")),
            Err(e) => {
                tracing::warn!("{e}");
                self.say(format!("{units} units, not remembered: {e}"));
            }
        }
    }

    /// Whether the quit key waits for its second press.
    pub fn quit_armed(&self) -> bool {
        self.quit_armed > 0
    }
}

/// Every key the screens understand, for the help screen: (keys, what).
pub const KEYS: &[(&str, &str)] = &[
    ("1 2 3 4 5", "run, power, battery, feed, channels screens"),
    ("Tab  Shift-Tab", "next / previous screen"),
    ("? or h", "this help"),
    ("Space or p", "pause / resume (replays and rehearsals, as the four below)"),
    ("+  -", "faster / slower (x0.1 … x64, then as fast as possible)"),
    ("→ .   ← ,", "seek 5 s forward / back"),
    (">  <", "seek 30 s forward / back"),
    ("s", "step one snapshot (pauses)"),
    ("m", "mark: type a note; Enter records it, Esc cancels"),
    ("a", "acknowledge every alert shown"),
    ("u", "units: metric or imperial, alerts too (remembered)"),
    ("/  Esc", "channels screen: filter by name / clear the filter"),
    ("↑ ↓  PgUp PgDn", "scroll the channel list"),
    ("q q  or Ctrl-C", "quit: q twice in a row (another key between cancels)"),
];

#[cfg(test)]
mod tests {
    use super::*;

    fn app() -> App {
        App::new(SessionInfo { mode: Mode::Live, config: Arc::new(ConfigSet::embedded()) }, Theme { color: false })
    }

    fn key(c: KeyCode) -> KeyEvent {
        KeyEvent::new(c, KeyModifiers::NONE)
    }

    #[test]
    fn screens_switch_by_number_and_tab() {
        let mut a = app();
        a.on_key(key(KeyCode::Char('3')));
        assert_eq!(a.screen, Screen::Battery);
        a.on_key(key(KeyCode::Tab));
        assert_eq!(a.screen, Screen::Feed);
        a.on_key(key(KeyCode::Tab));
        a.on_key(key(KeyCode::Tab));
        assert_eq!(a.screen, Screen::Run, "tab wraps over the five data screens");
        a.on_key(key(KeyCode::BackTab));
        assert_eq!(a.screen, Screen::Channels);
        a.on_key(key(KeyCode::Char('?')));
        assert_eq!(a.screen, Screen::Help);
    }

    #[test]
    fn player_keys() {
        let mut a = App::new(
            SessionInfo { mode: Mode::Replay { file: "x.tvrec".into() }, config: Arc::new(ConfigSet::embedded()) },
            Theme { color: false },
        );
        assert_eq!(a.on_key(key(KeyCode::Char(' '))), vec![Action::Player(Control::Playback(Playback::TogglePause))]);
        assert_eq!(
            a.on_key(key(KeyCode::Right)),
            vec![Action::Player(Control::Playback(Playback::SeekBy(5 * NS_PER_S)))]
        );
        assert_eq!(
            a.on_key(key(KeyCode::Char('<'))),
            vec![Action::Player(Control::Playback(Playback::SeekBy(-30 * NS_PER_S)))]
        );
        assert_eq!(a.on_key(key(KeyCode::Char('+'))), vec![Action::Player(Control::Playback(Playback::Faster))]);
        assert_eq!(a.on_key(key(KeyCode::Char('s'))), vec![Action::Player(Control::Playback(Playback::Step))]);
        assert_eq!(
            a.on_key(key(KeyCode::Char('a'))),
            vec![Action::Player(Control::Operator(Operator::Ack("*".into())))]
        );
    }

    #[test]
    fn live_says_the_player_keys_are_for_replays() {
        let mut a = app();
        for k in [KeyCode::Char(' '), KeyCode::Right, KeyCode::Char('<'), KeyCode::Char('+'), KeyCode::Char('s')] {
            assert!(a.on_key(key(k)).is_empty(), "{k:?} does nothing live");
            assert!(a.message.as_ref().is_some_and(|(m, _)| m.contains("for replays")));
        }
        // Marks and acknowledgements work live.
        assert_eq!(
            a.on_key(key(KeyCode::Char('a'))),
            vec![Action::Player(Control::Operator(Operator::Ack("*".into())))]
        );
    }

    // Issue 16, item 2: a followed run is read-only: the replay keys say
    // they do not apply, screen and unit keys work.
    #[test]
    fn a_followed_run_says_the_replay_keys_do_not_apply() {
        let mut a = App::new(
            SessionInfo {
                mode: Mode::Follow { topic: "pit/run".into(), sends: false },
                config: Arc::new(ConfigSet::embedded()),
            },
            Theme { color: false },
        );
        for k in [KeyCode::Char(' '), KeyCode::Left, KeyCode::Char('>'), KeyCode::Char('-'), KeyCode::Char('s')] {
            assert!(a.on_key(key(k)).is_empty(), "{k:?} does nothing when following");
            assert!(a.message.as_ref().is_some_and(|(m, _)| m.contains("do not apply to a followed run")));
        }
        a.on_key(key(KeyCode::Char('2')));
        assert_eq!(a.screen, Screen::Power);
        a.on_key(key(KeyCode::Char('u')));
        assert_eq!(a.units, Units::Imperial);
    }

    // Issue 16, item 2: with --send-keys a follower's `a` asks the reading
    // station to acknowledge each alert shown, active and not yet
    // acknowledged, one by one (the station takes no "all"); `m` sends the
    // mark typed. Without it both keys stay read-only.
    #[test]
    fn a_follower_with_send_keys_sends_one_ack_per_alert_and_its_marks() {
        let alert = |key: &str, active: bool, acked: bool| crate::engine::Alert {
            key: key.into(),
            severity: crate::config::Severity::Caution,
            message: "m".into(),
            text: "m".into(),
            raised_ns: 0,
            active,
            acked,
        };
        let mut snap = crate::engine::Engine::new(Arc::new(ConfigSet::embedded()), Default::default())
            .snapshot_at(0, &Default::default());
        snap.alerts = vec![alert("derating", true, false), alert("target", true, true), alert("stale", false, false)];
        let frame = Arc::new(UiFrame { snapshot: Arc::new(snap), status: StreamStatus::default() });
        let follower = |sends: bool| {
            let mut a = App::new(
                SessionInfo {
                    mode: Mode::Follow { topic: "pit/run".into(), sends },
                    config: Arc::new(ConfigSet::embedded()),
                },
                Theme { color: false },
            );
            a.on_frame(frame.clone());
            a
        };
        let mut a = follower(true);
        assert_eq!(
            a.on_key(key(KeyCode::Char('a'))),
            vec![Action::Player(Control::Operator(Operator::Ack("derating".into())))]
        );
        assert!(a.message.as_ref().is_some_and(|(m, _)| m.contains("1 alert sent to the reading station")));
        assert!(a.on_key(key(KeyCode::Char('m'))).is_empty());
        for c in "late".chars() {
            a.on_key(key(KeyCode::Char(c)));
        }
        assert_eq!(
            a.on_key(key(KeyCode::Enter)),
            vec![Action::Player(Control::Operator(Operator::Mark("late".into())))]
        );
        assert!(a.message.as_ref().is_some_and(|(m, _)| m.starts_with("mark sent to the reading station")));
        let mut ro = follower(false);
        assert!(ro.on_key(key(KeyCode::Char('a'))).is_empty());
        assert!(ro.on_key(key(KeyCode::Char('m'))).is_empty() && ro.prompt.is_none());
        assert!(ro.message.as_ref().is_some_and(|(m, _)| m.contains("read-only")));
    }

    // Issue 16, item 2: the share link's state is read at the frame rate,
    // with the time it last changed.
    #[test]
    fn the_share_link_is_read_on_each_tick() {
        let up = Arc::new(std::sync::atomic::AtomicBool::new(true));
        let mut a = app();
        let u = up.clone();
        a.share_probe = Some(Box::new(move || ShareLink {
            up: u.load(std::sync::atomic::Ordering::Relaxed),
            detail: "2 not shared".into(),
        }));
        assert_eq!(a.share_text(), None, "nothing until read");
        a.on_tick();
        assert_eq!(a.share_text().as_deref(), Some("share ▲ up · 2 not shared"));
        up.store(false, std::sync::atomic::Ordering::Relaxed);
        a.on_tick();
        assert!(a.share_text().is_some_and(|t| t.starts_with("share ▼ down since ")), "{:?}", a.share_text());
    }

    #[test]
    fn quitting_takes_two_presses_or_ctrl_c() {
        let mut a = app();
        assert!(a.on_key(key(KeyCode::Char('q'))).is_empty());
        assert!(a.quit_armed());
        assert_eq!(a.on_key(key(KeyCode::Char('q'))), vec![Action::Quit]);
        let mut a = app();
        a.on_key(key(KeyCode::Char('q')));
        for _ in 0..QUIT_ARM_TICKS {
            a.on_tick();
        }
        assert!(a.on_key(key(KeyCode::Char('q'))).is_empty(), "the first press expired");
        assert_eq!(a.on_key(KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL)), vec![Action::Quit]);
    }

    // Issue 15, item 21: `q`, another key, `q` still quit.
    #[test]
    fn a_key_between_the_two_qs_cancels_the_quit() {
        let mut a = app();
        a.on_key(key(KeyCode::Char('q')));
        assert!(a.message.as_ref().is_some_and(|m| m.0 == QUIT_ASK));
        a.on_key(key(KeyCode::Char('2')));
        assert!(!a.quit_armed() && a.message.is_none(), "the other key cancels, and the prompt goes");
        assert!(a.on_key(key(KeyCode::Char('q'))).is_empty(), "this q only arms again");
        assert_eq!(a.on_key(key(KeyCode::Char('q'))), vec![Action::Quit]);
    }

    #[test]
    fn marks_are_typed_then_sent() {
        let mut a = app();
        assert!(a.on_key(key(KeyCode::Char('m'))).is_empty());
        for c in "boost on".chars() {
            assert!(a.on_key(key(KeyCode::Char(c))).is_empty(), "typing does not trigger other keys");
        }
        assert_eq!(a.screen, Screen::Run, "the digits and letters went into the prompt");
        assert_eq!(
            a.on_key(key(KeyCode::Enter)),
            vec![Action::Player(Control::Operator(Operator::Mark("boost on".into())))]
        );
        a.on_key(key(KeyCode::Char('m')));
        assert_eq!(
            a.on_key(key(KeyCode::Enter)),
            vec![Action::Player(Control::Operator(Operator::Mark("mark 2".into())))]
        );
        a.on_key(key(KeyCode::Char('m')));
        a.on_key(key(KeyCode::Char('x')));
        assert!(a.on_key(key(KeyCode::Esc)).is_empty());
        assert!(a.prompt.is_none());
    }

    // Issue 15, item 12: `u` switched some figures only and was forgotten
    // at the next run; it now asks for the choice to be remembered.
    #[test]
    fn the_unit_key_switches_and_asks_to_remember() {
        let mut a = app();
        assert_eq!(
            a.on_key(key(KeyCode::Char('u'))),
            vec![Action::Remember(super::super::settings::Settings { units: Units::Imperial })]
        );
        assert_eq!(a.units, Units::Imperial);
        a.remembered(Ok("/x/settings.toml".into()));
        assert_eq!(a.message.as_ref().unwrap().0, "imperial units (remembered)");
        a.remembered(Err(super::super::settings::SettingsError::NoFolder));
        assert!(a.message.as_ref().unwrap().0.starts_with("imperial units, not remembered: no config folder"));
    }

    #[test]
    fn the_filter_takes_keys_only_on_the_channels_screen() {
        let mut a = app();
        a.on_key(key(KeyCode::Char('/')));
        assert!(!a.filtering);
        a.on_key(key(KeyCode::Char('5')));
        a.on_key(key(KeyCode::Char('/')));
        for c in "batt".chars() {
            a.on_key(key(KeyCode::Char(c)));
        }
        assert_eq!(a.filter, "batt");
        a.on_key(key(KeyCode::Enter));
        assert!(!a.filtering);
        a.on_key(key(KeyCode::Esc));
        assert!(a.filter.is_empty());
    }

    // Issue 15, item 19: under --no-record, `m` said `marked:` though
    // nothing was stored.
    #[test]
    fn a_mark_says_when_it_is_not_recorded() {
        let frame = |recording: Option<&str>, position_ns, recorded_to_ns| {
            Arc::new(UiFrame {
                snapshot: Arc::new(
                    crate::engine::Engine::new(Arc::new(ConfigSet::embedded()), Default::default())
                        .snapshot_at(0, &Default::default()),
                ),
                status: StreamStatus {
                    recording: recording.map(Into::into),
                    position_ns,
                    recorded_to_ns,
                    ..StreamStatus::default()
                },
            })
        };
        let said = |f: Arc<UiFrame>| {
            let mut a = app();
            a.on_frame(f);
            a.on_key(key(KeyCode::Char('m')));
            a.on_key(key(KeyCode::Char('x')));
            a.on_key(key(KeyCode::Enter));
            a.message.unwrap().0
        };
        assert_eq!(said(frame(Some("r.tvrec"), Some(5), Some(5))), "marked: x");
        let m = said(frame(None, Some(5), Some(5)));
        assert!(m.contains("not recorded") && !m.starts_with("marked"), "{m}");
        let m = said(frame(Some("r.tvrec"), Some(5), Some(9)));
        assert!(m.starts_with("marked: x") && m.contains("where the recording has reached"), "{m}");
    }
}
