//! The broker's username and password: from a file only its owner can read,
//! or from the environment. Never from the command line (a process list
//! and a shell history show it to anyone).

use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};

/// The environment variables read when no file is given.
pub const ENV_USERNAME: &str = "TERMVEL_SHARE_USERNAME";
pub const ENV_PASSWORD: &str = "TERMVEL_SHARE_PASSWORD";

/// A username and password for the broker.
#[derive(Clone, PartialEq, Eq)]
pub struct Credentials {
    pub username: String,
    pub password: String,
}

impl std::fmt::Debug for Credentials {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        // Never the password, not even in a log.
        f.debug_struct("Credentials").field("username", &self.username).finish_non_exhaustive()
    }
}

/// Why credentials could not be had.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum CredentialsError {
    /// The file could not be read.
    #[error("cannot read the credentials file {path}: {error}")]
    Read { path: PathBuf, error: String },
    /// The file can be read by its group or others.
    #[error(
        "the credentials file {path} can be read by others (mode {mode:03o}): refusing it; make it readable by you only (chmod 600 {path})"
    )]
    Exposed { path: PathBuf, mode: u32 },
    /// The file is not `username = "…"` and `password = "…"`.
    #[error("{path}: {why} (expected two lines: username = \"…\" and password = \"…\")")]
    Format { path: PathBuf, why: String },
    /// Only one of the two environment variables is set.
    #[error("{set} is set but {missing} is not: give both or neither")]
    HalfEnv { set: &'static str, missing: &'static str },
}

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct FileForm {
    username: String,
    password: String,
}

impl Credentials {
    /// From `file` when given, else the environment; `None` when neither
    /// names any (an anonymous broker).
    pub fn load(file: Option<&Path>) -> Result<Option<Credentials>, CredentialsError> {
        match file {
            Some(p) => Credentials::from_file(p).map(Some),
            None => Credentials::from_env(|k| std::env::var(k).ok()),
        }
    }

    /// Reads a TOML file of `username` and `password`, refusing one that
    /// its group or others can read.
    pub fn from_file(path: &Path) -> Result<Credentials, CredentialsError> {
        let read_err = |e: std::io::Error| CredentialsError::Read { path: path.to_path_buf(), error: e.to_string() };
        let meta = std::fs::metadata(path).map_err(read_err)?;
        let mode = meta.permissions().mode() & 0o777;
        if mode & 0o077 != 0 {
            return Err(CredentialsError::Exposed { path: path.to_path_buf(), mode });
        }
        let text = std::fs::read_to_string(path).map_err(read_err)?;
        let form: FileForm = toml::from_str(&text).map_err(|e| CredentialsError::Format {
            path: path.to_path_buf(),
            // toml's message quotes the line, which may hold the password: only its first line.
            why: e.message().lines().next().unwrap_or("not TOML").to_string(),
        })?;
        if form.username.is_empty() {
            return Err(CredentialsError::Format { path: path.to_path_buf(), why: "the username is empty".into() });
        }
        Ok(Credentials { username: form.username, password: form.password })
    }

    /// From [`ENV_USERNAME`] and [`ENV_PASSWORD`] (through `get`, so tests
    /// need not touch the process environment).
    pub fn from_env(get: impl Fn(&str) -> Option<String>) -> Result<Option<Credentials>, CredentialsError> {
        match (get(ENV_USERNAME), get(ENV_PASSWORD)) {
            (Some(username), Some(password)) => Ok(Some(Credentials { username, password })),
            (None, None) => Ok(None),
            (Some(_), None) => Err(CredentialsError::HalfEnv { set: ENV_USERNAME, missing: ENV_PASSWORD }),
            (None, Some(_)) => Err(CredentialsError::HalfEnv { set: ENV_PASSWORD, missing: ENV_USERNAME }),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn file(text: &str, mode: u32) -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("share.toml");
        std::fs::write(&p, text).unwrap();
        std::fs::set_permissions(&p, std::fs::Permissions::from_mode(mode)).unwrap();
        (dir, p)
    }

    // Issue 16, item 4: a credentials file others can read is refused.
    #[test]
    fn a_file_readable_by_others_is_refused() {
        let (_d, p) = file("username = \"pit\"\npassword = \"s3cret\"\n", 0o644);
        let e = Credentials::from_file(&p).unwrap_err();
        assert!(matches!(e, CredentialsError::Exposed { mode: 0o644, .. }), "{e}");
        let (_d, p) = file("username = \"pit\"\npassword = \"s3cret\"\n", 0o640);
        assert!(matches!(Credentials::from_file(&p), Err(CredentialsError::Exposed { .. })));
        let (_d, p) = file("username = \"pit\"\npassword = \"s3cret\"\n", 0o600);
        let c = Credentials::from_file(&p).unwrap();
        assert_eq!((c.username.as_str(), c.password.as_str()), ("pit", "s3cret"));
        assert!(!format!("{c:?}").contains("s3cret"), "Debug hides the password");
    }

    #[test]
    fn a_malformed_file_says_so_without_the_password() {
        let (_d, p) = file("username = \"pit\"\npasword = \"s3cret\"\n", 0o600);
        let e = Credentials::from_file(&p).unwrap_err();
        assert!(matches!(e, CredentialsError::Format { .. }), "{e}");
        assert!(!e.to_string().contains("s3cret"), "{e}");
    }

    #[test]
    fn the_environment_gives_both_or_neither() {
        let env = |pairs: &'static [(&'static str, &'static str)]| {
            move |k: &str| pairs.iter().find(|(n, _)| *n == k).map(|(_, v)| v.to_string())
        };
        assert_eq!(Credentials::from_env(env(&[])), Ok(None));
        let both = Credentials::from_env(env(&[(ENV_USERNAME, "pit"), (ENV_PASSWORD, "pw")])).unwrap().unwrap();
        assert_eq!(both.username, "pit");
        assert!(matches!(Credentials::from_env(env(&[(ENV_USERNAME, "pit")])), Err(CredentialsError::HalfEnv { .. })));
    }
}
