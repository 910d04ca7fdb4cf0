//! Styles of the screens in one place. Every state is also shown by a word
//! or a symbol, so the screens read the same with `NO_COLOR` set (then no
//! colour is used at all, only bold, dim and reverse).

use ratatui::style::{Color, Modifier, Style};

use crate::config::Severity;

/// The palette: a dark-terminal scheme of termvel's own.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Theme {
    pub color: bool,
}

impl Theme {
    /// Colour unless the `NO_COLOR` convention asks for none (no-color.org:
    /// any non-empty value).
    pub fn from_env() -> Theme {
        Theme { color: std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty()) }
    }

    fn fg(&self, c: Color) -> Style {
        if self.color { Style::new().fg(c) } else { Style::new() }
    }

    /// Labels and units.
    pub fn label(&self) -> Style {
        self.fg(Color::Gray)
    }
    /// Numbers that matter.
    pub fn value(&self) -> Style {
        self.fg(Color::White).add_modifier(Modifier::BOLD)
    }
    /// The large speed figures.
    pub fn figure(&self) -> Style {
        self.fg(Color::LightCyan).add_modifier(Modifier::BOLD)
    }
    /// Headings and the active screen's name.
    pub fn heading(&self) -> Style {
        self.fg(Color::LightMagenta).add_modifier(Modifier::BOLD)
    }
    pub fn dim(&self) -> Style {
        self.fg(Color::DarkGray).add_modifier(Modifier::DIM)
    }
    /// Something good: fresh, converged, within limits.
    pub fn good(&self) -> Style {
        self.fg(Color::LightGreen)
    }
    /// Stale or unconverged: to be read with care.
    pub fn doubtful(&self) -> Style {
        self.fg(Color::Yellow).add_modifier(Modifier::ITALIC)
    }
    /// The projection and everything ahead of the car.
    pub fn ahead(&self) -> Style {
        self.fg(Color::LightBlue)
    }
    /// The measured trace behind the car.
    pub fn behind(&self) -> Style {
        self.fg(Color::White)
    }
    /// Limits: braking point, target, rated values.
    pub fn limit(&self) -> Style {
        self.fg(Color::LightRed)
    }
    pub fn severity(&self, s: Severity) -> Style {
        match (s, self.color) {
            (Severity::Alarm, true) => Style::new().fg(Color::White).bg(Color::Red).add_modifier(Modifier::BOLD),
            (Severity::Alarm, false) => Style::new().add_modifier(Modifier::BOLD | Modifier::REVERSED),
            (Severity::Caution, _) => self.fg(Color::Yellow).add_modifier(Modifier::BOLD),
            (Severity::Info, _) => self.fg(Color::Cyan),
        }
    }
    /// The caution line at the foot of every screen.
    pub fn caution_line(&self) -> Style {
        self.fg(Color::Yellow)
    }
    /// The status line.
    pub fn status(&self) -> Style {
        if self.color {
            Style::new().fg(Color::Black).bg(Color::Gray)
        } else {
            Style::new().add_modifier(Modifier::REVERSED)
        }
    }
    /// The recording indicator.
    pub fn recording(&self) -> Style {
        if self.color {
            Style::new().fg(Color::White).bg(Color::Red).add_modifier(Modifier::BOLD)
        } else {
            Style::new().add_modifier(Modifier::BOLD)
        }
    }
}

/// The word and symbol of a severity, so it reads without colour.
pub fn severity_tag(s: Severity) -> &'static str {
    match s {
        Severity::Alarm => "!! ALARM",
        Severity::Caution => " ! CAUTION",
        Severity::Info => " i INFO",
    }
}
