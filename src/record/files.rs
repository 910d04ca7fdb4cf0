//! Recording files at the edge: where recordings go and what they are
//! called. The only module besides the sources and the stream drivers that
//! reads the wall clock (for file names and the recording's `%created` line).

use std::fs::File;
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use super::{EXTENSION, Header, RecordingWriter, VERSION};
use crate::civil_time::{utc_iso, utc_parts};
use crate::config::ConfigSet;
use crate::event::SourceTable;

/// The default directory for recordings: the platform's data directory
/// (`~/.local/share/termvel/recordings` on Linux).
pub fn default_record_dir() -> PathBuf {
    directories::ProjectDirs::from("", "", "termvel")
        .map(|d| d.data_dir().join("recordings"))
        .unwrap_or_else(|| PathBuf::from("termvel-recordings"))
}

fn now_unix_s() -> i64 {
    SystemTime::now().duration_since(UNIX_EPOCH).map(|d| d.as_secs() as i64).unwrap_or(0)
}

/// Creates a new recording file in `dir` named after the command and the
/// time, never overwriting: `termvel-20261202-101112-replay.tvrec`.
pub fn create_recording(
    dir: &Path,
    command: &str,
    config: &ConfigSet,
    sources: &SourceTable,
) -> std::io::Result<(RecordingWriter<File>, PathBuf)> {
    std::fs::create_dir_all(dir)?;
    let now = now_unix_s();
    let (y, mo, d, h, mi, s) = utc_parts(now);
    let stem = format!("termvel-{y:04}{mo:02}{d:02}-{h:02}{mi:02}{s:02}-{command}");
    let mut n = 0;
    let (file, path) = loop {
        let name = if n == 0 { format!("{stem}.{EXTENSION}") } else { format!("{stem}-{n}.{EXTENSION}") };
        let path = dir.join(name);
        match File::options().write(true).create_new(true).open(&path) {
            Ok(f) => break (f, path),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists && n < 1000 => n += 1,
            Err(e) => return Err(e),
        }
    };
    let header = Header {
        version: VERSION,
        created: Some(utc_iso(now)),
        sources: sources.clone(),
        configs: config.texts.clone(),
        is_termvel: true,
    };
    Ok((RecordingWriter::new(file, &header)?, path))
}
