//! ui: the full-screen terminal interface (ratatui on crossterm, on tokio).
//!
//! One event enum ([`UiEvent`]: a key, a resize, a frame tick, new data, a
//! signal) into one loop; state changes only in the handlers of
//! [`app::App`]; drawing ([`draw`]) is a pure function of the app state. The
//! stream's driver (`crate::stream`) runs in its own task and publishes its
//! latest snapshot through a `watch` channel ([`frames::UiSink`]): the
//! screen takes the latest and never holds the stream back (the recorder,
//! not the screen, sees every event).

pub mod app;
pub mod chrome;
pub mod format;
pub mod frames;
pub mod screens;
pub mod settings;
pub mod theme;
pub mod widgets;

use std::sync::Arc;
use std::time::Duration;

use crossterm::event::{Event as TermEvent, EventStream};
use futures_util::StreamExt;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout};
use tokio::sync::{mpsc, watch};

use crate::stream::{Control, LatencyHistogram};
use app::{Action, App, LatencyView, Screen, UiFrame};

/// Frames drawn per second, whatever the input rate.
pub const FRAME_RATE_HZ: f64 = 20.0;
/// The frame interval: 20 per second is 50 ms (not 20 s; see the test).
pub fn frame_interval() -> Duration {
    Duration::from_secs_f64(1.0 / FRAME_RATE_HZ)
}
/// Smallest terminal the full screens fit.
pub const MIN_WIDTH: u16 = 80;
pub const MIN_HEIGHT: u16 = 24;

/// Draws the whole screen.
pub fn draw(f: &mut Frame, app: &App) {
    let area = f.area();
    if area.width < MIN_WIDTH || area.height < MIN_HEIGHT {
        screens::run::draw_small(f, area, app);
        return;
    }
    let [header, body, caution, status] =
        Layout::vertical([Constraint::Length(1), Constraint::Min(10), Constraint::Length(1), Constraint::Length(1)])
            .areas(area);
    chrome::header(f, header, app);
    match app.screen {
        Screen::Run => screens::run::draw(f, body, app),
        Screen::Power => screens::power::draw(f, body, app),
        Screen::Battery => screens::battery::draw(f, body, app),
        Screen::Feed => screens::feed::draw(f, body, app),
        Screen::Channels => screens::channels::draw(f, body, app),
        Screen::Help => screens::help::draw(f, body, app),
    }
    chrome::caution(f, caution, app);
    chrome::status(f, status, app);
}

/// Everything that reaches the loop.
#[derive(Debug)]
pub enum UiEvent {
    Key(crossterm::event::KeyEvent),
    Resize,
    Tick,
    /// The player published a new snapshot or status.
    Data,
    /// SIGTERM or SIGHUP: leave cleanly.
    Signal(&'static str),
    /// The player ended (its task returned).
    PlayerDone,
}

fn read_latency(h: &LatencyHistogram) -> LatencyView {
    let Ok(h) = h.lock() else { return LatencyView::default() };
    if h.is_empty() {
        return LatencyView::default();
    }
    let mut buckets = Vec::new();
    let mut upper = 1u64;
    let mut below = 0u64;
    while upper < h.max() * 2 && buckets.len() < 26 {
        let n = h.count_between(0, upper);
        buckets.push((upper, n - below));
        below = n;
        upper *= 2;
    }
    LatencyView {
        count: h.len(),
        p50_us: h.value_at_quantile(0.5),
        p99_us: h.value_at_quantile(0.99),
        max_us: h.max(),
        buckets,
    }
}

/// Restores the terminal when dropped, whether the loop ends, errs or panics.
struct TerminalGuard;

impl Drop for TerminalGuard {
    fn drop(&mut self) {
        ratatui::restore();
    }
}

/// How the screens kept up: frames drawn, over how long, and the longest
/// time between two frames.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct DrawStats {
    pub frames: u64,
    pub seconds: f64,
    pub longest_gap_s: f64,
}

impl DrawStats {
    /// One line for stderr after the screens close.
    pub fn line(&self) -> String {
        format!(
            "termvel: screens drew {} frames in {:.1} s ({:.1} per s; longest gap {:.0} ms)",
            self.frames,
            self.seconds,
            if self.seconds > 0.0 { self.frames as f64 / self.seconds } else { 0.0 },
            self.longest_gap_s * 1000.0
        )
    }
}

/// Runs the screens until the user quits, a signal arrives or (when
/// `quit_when_done`) the player ends. `frames` carries the player's
/// snapshots; `controls` goes to the player.
pub async fn run(
    mut app: App,
    mut frames: watch::Receiver<Option<Arc<UiFrame>>>,
    controls: mpsc::Sender<Control>,
    latency: LatencyHistogram,
    mut player_done: tokio::sync::oneshot::Receiver<()>,
) -> std::io::Result<DrawStats> {
    let mut terminal = ratatui::init();
    let started = std::time::Instant::now();
    let mut stats = DrawStats::default();
    let mut last_draw: Option<std::time::Instant> = None;
    let _guard = TerminalGuard;
    let mut term_events = EventStream::new();
    let mut ticker = tokio::time::interval(frame_interval());
    ticker.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Skip);
    let mut sigterm = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate())?;
    let mut sighup = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::hangup())?;
    let mut done = false;
    loop {
        let ev = tokio::select! {
            e = term_events.next() => match e {
                Some(Ok(TermEvent::Key(k))) => UiEvent::Key(k),
                Some(Ok(TermEvent::Resize(_, _))) => UiEvent::Resize,
                Some(Ok(_)) => continue,
                Some(Err(e)) => return Err(e),
                None => UiEvent::Signal("input closed"),
            },
            _ = ticker.tick() => UiEvent::Tick,
            r = frames.changed() => match r {
                Ok(()) => UiEvent::Data,
                Err(_) => UiEvent::PlayerDone,
            },
            _ = sigterm.recv() => UiEvent::Signal("SIGTERM"),
            _ = sighup.recv() => UiEvent::Signal("SIGHUP"),
            _ = &mut player_done, if !done => UiEvent::PlayerDone,
        };
        match ev {
            UiEvent::Key(k) => {
                for action in app.on_key(k) {
                    match action {
                        Action::Quit => {
                            let _ = controls.try_send(Control::Quit);
                            stats.seconds = started.elapsed().as_secs_f64();
                            return Ok(stats);
                        }
                        Action::Player(c) => {
                            let _ = controls.try_send(c);
                        }
                        Action::Remember(s) => app.remembered(settings::remember(&s)),
                    }
                }
            }
            UiEvent::Resize => {
                terminal.autoresize()?;
            }
            UiEvent::Tick => {
                app.on_tick();
                app.latency = read_latency(&latency);
                terminal.draw(|f| draw(f, &app))?;
                let now = std::time::Instant::now();
                if let Some(prev) = last_draw {
                    stats.longest_gap_s = stats.longest_gap_s.max((now - prev).as_secs_f64());
                }
                last_draw = Some(now);
                stats.frames += 1;
            }
            UiEvent::Data => {
                let latest = frames.borrow_and_update().clone();
                if let Some(fr) = latest {
                    app.on_frame(fr);
                }
            }
            UiEvent::Signal(why) => {
                tracing::info!("leaving on {why}");
                let _ = controls.try_send(Control::Quit);
                stats.seconds = started.elapsed().as_secs_f64();
                return Ok(stats);
            }
            UiEvent::PlayerDone => {
                done = true;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timing_constants() {
        // "20 frames a second" is a 50 ms interval, not a 20 s one.
        assert_eq!(frame_interval(), Duration::from_millis(50));
        assert_eq!(app::QUIT_ARM_TICKS as f64 / FRAME_RATE_HZ, 2.0, "a first q waits two seconds");
        assert_eq!(app::MESSAGE_TICKS as f64 / FRAME_RATE_HZ, 3.0, "messages stay three seconds");
    }

    #[test]
    fn latency_view_reads_quantiles_and_buckets() {
        let h = crate::stream::latency_histogram();
        {
            let mut g = h.lock().unwrap();
            for v in 1..=1000u64 {
                g.record(v).unwrap();
            }
        }
        let v = read_latency(&h);
        assert_eq!(v.count, 1000);
        // hdrhistogram reports bucket values: within 0.1 % (3 digits).
        assert!((v.p50_us as f64 - 500.0).abs() <= 1.0, "{}", v.p50_us);
        assert!((v.p99_us as f64 - 990.0).abs() <= 1.0, "{}", v.p99_us);
        assert_eq!(v.buckets.iter().map(|b| b.1).sum::<u64>(), 1000);
    }
}
