//! The screens' remembered settings: one small TOML file in the user's
//! config folder, `$XDG_CONFIG_HOME/termvel/settings.toml` (else
//! `~/.config/termvel/settings.toml`). Today it holds the unit set, written
//! when `u` switches it:
//!
//! ```toml
//! units = "imperial"   # or "metric"
//! ```
//!
//! A missing or unreadable file means the defaults (metric), said in the
//! log; a malformed one is an error naming the file, line, key and what was
//! expected, so a typo is not silently taken for "metric".

use std::path::{Path, PathBuf};

use toml::Spanned;

use crate::config::locate::{key_path_at, line_col};
use crate::output_file::{OutputError, PendingFile};
use crate::units::UnitSet;

/// The settings file's name in termvel's config folder.
pub const FILE_NAME: &str = "settings.toml";

/// What the screens remember between runs.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Settings {
    /// The display unit set.
    pub units: UnitSet,
}

/// A settings file that cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum SettingsError {
    /// The file is not TOML, has a key termvel does not know, or a value
    /// it cannot take: where, which key, what was expected.
    #[error("{}:{line}:{column}: {key}: {expected}", path.display())]
    Malformed {
        /// The settings file.
        path: PathBuf,
        /// 1-based line and column of the fault.
        line: usize,
        column: usize,
        /// The key at fault (`units`), or `(syntax)` when the line is not TOML.
        key: String,
        /// What was expected, and what was found.
        expected: String,
    },
    /// The file (or its folder) could not be written.
    #[error("cannot remember the settings: {0}")]
    Write(#[from] OutputError),
    /// No config folder: neither `XDG_CONFIG_HOME` nor `HOME` is set.
    #[error("no config folder (neither XDG_CONFIG_HOME nor HOME is set)")]
    NoFolder,
}

/// The settings, and a line for the log when they are the defaults because
/// the file is missing or unreadable.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Loaded {
    pub settings: Settings,
    pub note: Option<String>,
}

/// The settings file's path from the environment's values: under
/// `XDG_CONFIG_HOME` when it is an absolute path (the XDG rule), else
/// under `HOME/.config`.
pub fn path_from(xdg_config_home: Option<&std::ffi::OsStr>, home: Option<&std::ffi::OsStr>) -> Option<PathBuf> {
    let base = match xdg_config_home.map(Path::new).filter(|p| p.is_absolute()) {
        Some(x) => x.to_path_buf(),
        None => Path::new(home.filter(|h| !h.is_empty())?).join(".config"),
    };
    Some(base.join("termvel").join(FILE_NAME))
}

/// The settings file's path in this process's environment.
pub fn path() -> Option<PathBuf> {
    path_from(std::env::var_os("XDG_CONFIG_HOME").as_deref(), std::env::var_os("HOME").as_deref())
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSettings {
    units: Option<Spanned<String>>,
}

/// The settings a session on the screens starts with (the file at
/// [`path`]); a headless session draws nothing and reads none. A malformed
/// file is refused before a recording starts.
pub fn for_session(headless: bool) -> Result<Loaded, SettingsError> {
    if headless {
        return Ok(Loaded { settings: Default::default(), note: None });
    }
    load(path().as_deref())
}

/// Reads the settings at `path` (`None`: no config folder).
pub fn load(path: Option<&Path>) -> Result<Loaded, SettingsError> {
    let defaults = |note: String| Ok(Loaded { settings: Settings::default(), note: Some(note) });
    let Some(path) = path else {
        return defaults("no config folder (XDG_CONFIG_HOME, HOME): metric units".into());
    };
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            return defaults(format!("no settings file at {}: metric units", path.display()));
        }
        Err(e) => return defaults(format!("cannot read {}: {e}: metric units", path.display())),
    };
    parse(path, &text).map(|settings| Loaded { settings, note: None })
}

/// The settings of a file's text; `path` names it in errors.
pub fn parse(path: &Path, text: &str) -> Result<Settings, SettingsError> {
    let malformed = |offset: usize, key: String, expected: String| {
        let (line, column) = line_col(text, offset);
        SettingsError::Malformed { path: path.to_path_buf(), line, column, key, expected }
    };
    let raw: RawSettings = toml::from_str(text).map_err(|e| {
        let offset = e.span().map_or(0, |s| s.start);
        let key = key_path_at(text, offset);
        let key = if key.is_empty() { "(syntax)".to_string() } else { key };
        let what = e.message().lines().next().unwrap_or("not TOML").to_string();
        malformed(offset, key, format!("{what} (expected `units = \"metric\"` or `units = \"imperial\"`)"))
    })?;
    let mut settings = Settings::default();
    if let Some(u) = raw.units {
        settings.units = UnitSet::from_name(u.get_ref()).ok_or_else(|| {
            malformed(
                u.span().start,
                "units".into(),
                format!("expected \"metric\" or \"imperial\", found \"{}\"", u.get_ref()),
            )
        })?;
    }
    Ok(settings)
}

/// Writes `settings` to `path` whole (a temporary renamed into place),
/// making its folder if needed.
pub fn save(path: &Path, settings: &Settings) -> Result<(), SettingsError> {
    use std::io::Write as _;
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir).map_err(OutputError::new(path, "cannot create its folder"))?;
    }
    let (pending, mut file) = PendingFile::create(path)?;
    let text = format!(
        "# termvel's screen settings, rewritten when `u` switches the units.\n# units: \"metric\" or \"imperial\".\nunits = \"{}\"\n",
        settings.units.name()
    );
    file.write_all(text.as_bytes()).map_err(OutputError::new(path, "cannot write"))?;
    drop(file);
    pending.commit()?;
    Ok(())
}

/// Writes `settings` to this environment's settings file; its path.
pub fn remember(settings: &Settings) -> Result<PathBuf, SettingsError> {
    let path = path().ok_or(SettingsError::NoFolder)?;
    save(&path, settings)?;
    Ok(path)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::ffi::OsStr;

    #[test]
    fn the_path_follows_xdg_then_home() {
        let p = path_from(Some(OsStr::new("/cfg")), Some(OsStr::new("/home/a")));
        assert_eq!(p, Some(PathBuf::from("/cfg/termvel/settings.toml")));
        // A relative XDG_CONFIG_HOME is ignored (the XDG rule).
        let p = path_from(Some(OsStr::new("cfg")), Some(OsStr::new("/home/a")));
        assert_eq!(p, Some(PathBuf::from("/home/a/.config/termvel/settings.toml")));
        assert_eq!(path_from(None, None), None);
    }

    // Issue 15, item 12: the unit choice is remembered in a settings file;
    // a missing file is metric (with a note for the log), a malformed one
    // names file, line, key and what was expected.
    #[test]
    fn missing_and_malformed_files() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("termvel").join(FILE_NAME);
        let l = load(Some(&path)).unwrap();
        assert_eq!(l.settings.units, UnitSet::Metric);
        assert!(l.note.as_deref().is_some_and(|n| n.contains("no settings file")), "{l:?}");
        save(&path, &Settings { units: UnitSet::Imperial }).unwrap();
        assert_eq!(load(Some(&path)).unwrap(), Loaded { settings: Settings { units: UnitSet::Imperial }, note: None });
        let p = Path::new("settings.toml");
        let e = parse(p, "# mine\nunits = \"furlongs\"\n").unwrap_err().to_string();
        assert_eq!(e, "settings.toml:2:9: units: expected \"metric\" or \"imperial\", found \"furlongs\"");
        let e = parse(p, "\nunit = \"metric\"\n").unwrap_err().to_string();
        assert!(e.starts_with("settings.toml:2:1: unit: unknown field `unit`"), "{e}");
        let e = parse(p, "units = 3\n").unwrap_err().to_string();
        assert!(e.starts_with("settings.toml:1:9: units: invalid type"), "{e}");
        let e = parse(p, "units = \n").unwrap_err().to_string();
        assert!(e.starts_with("settings.toml:1:") && e.contains("expected `units = \"metric\"`"), "{e}");
        assert_eq!(parse(p, "").unwrap(), Settings::default());
    }

    #[test]
    fn an_unreadable_file_is_metric_with_a_note() {
        let dir = tempfile::tempdir().unwrap();
        // A folder where the file should be cannot be read as one.
        let path = dir.path().join(FILE_NAME);
        std::fs::create_dir(&path).unwrap();
        let l = load(Some(&path)).unwrap();
        assert_eq!(l.settings.units, UnitSet::Metric);
        assert!(l.note.as_deref().is_some_and(|n| n.starts_with("cannot read")), "{l:?}");
    }
}
