//! Which config set a recorded stream is read with: the files given on the
//! command line, else the recording's own embedded set, else (a candump
//! log) the built-in demo set. Replays, reports and exports all choose here.

use std::path::{Path, PathBuf};

use super::Header;
use crate::config::{ConfigErrors, ConfigSet};

/// A config set that cannot be used for a recording.
#[derive(Debug, thiserror::Error)]
pub enum ConfigChoiceError {
    /// The files given instead of the recording's own (`--config`) do not
    /// form a valid set.
    #[error("{0}")]
    Overrides(ConfigErrors),
    /// The set embedded in the recording does not load in this build (a
    /// newer or damaged recording); the user can give one instead.
    #[error("{0}\nthe recording's embedded config is not valid for this build; give --config")]
    Embedded(ConfigErrors),
}

impl Header {
    /// The config set to read this recording with, and a few words on where
    /// it came from: `overrides` if any are given, else the recording's own
    /// embedded set, else (a candump log) the built-in demo set. `file` is
    /// the recording, named in the origins of embedded files.
    pub fn config_set(&self, overrides: &[PathBuf], file: &Path) -> Result<(ConfigSet, String), ConfigChoiceError> {
        if !overrides.is_empty() {
            return ConfigSet::load(overrides)
                .map(|c| (c, "from --config".into()))
                .map_err(ConfigChoiceError::Overrides);
        }
        if self.is_termvel && !self.configs.is_empty() {
            let texts = self
                .configs
                .iter()
                .map(|c| (format!("{} (embedded in {})", c.origin, file.display()), c.text.clone()))
                .collect();
            return ConfigSet::from_texts(texts)
                .map(|c| (c, "embedded in the recording".into()))
                .map_err(ConfigChoiceError::Embedded);
        }
        Ok((
            ConfigSet::embedded(),
            "the built-in demo set (the log carries no config; give --config for your car)".into(),
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::{ConfigKind, ConfigText};

    #[test]
    fn a_candump_log_gets_the_demo_set_and_a_broken_embedded_set_says_so() {
        let log = Header::default();
        let (_, origin) = log.config_set(&[], Path::new("x.log")).unwrap();
        assert!(origin.starts_with("the built-in demo set"), "{origin}");

        let broken = Header {
            is_termvel: true,
            configs: vec![ConfigText { kind: ConfigKind::Vehicle, origin: "v.toml".into(), text: "kind = 1\n".into() }],
            ..Header::default()
        };
        let e = broken.config_set(&[], Path::new("run.tvrec")).unwrap_err();
        assert!(matches!(e, ConfigChoiceError::Embedded(_)));
        let text = e.to_string();
        assert!(text.contains("v.toml (embedded in run.tvrec)"), "{text}");
        assert!(
            text.ends_with("\nthe recording's embedded config is not valid for this build; give --config"),
            "{text}"
        );

        let e = log.config_set(&[PathBuf::from("/nonexistent/termvel.toml")], Path::new("x.log")).unwrap_err();
        assert!(matches!(e, ConfigChoiceError::Overrides(_)));
    }
}
