//! Session plumbing at the edge: where recordings go and what they are
//! called. The only module besides the sources and the player that reads the
//! wall clock (for file names and the recording's `%created` line).

use std::fs::File;
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use crate::config::ConfigSet;
use crate::event::SourceTable;
use crate::record::{EXTENSION, Header, RecordingWriter, VERSION};

/// The default directory for recordings: the platform's data directory
/// (`~/.local/share/termvel/recordings` on Linux).
pub fn default_record_dir() -> PathBuf {
    directories::ProjectDirs::from("", "", "termvel")
        .map(|d| d.data_dir().join("recordings"))
        .unwrap_or_else(|| PathBuf::from("termvel-recordings"))
}

/// UTC civil date and time of a Unix time (days-from-civil inverse, after
/// Howard Hinnant's public-domain date algorithms).
pub fn utc_parts(unix_s: i64) -> (i64, u32, u32, u32, u32, u32) {
    let days = unix_s.div_euclid(86_400);
    let secs = unix_s.rem_euclid(86_400) as u32;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d, secs / 3600, secs / 60 % 60, secs % 60)
}

/// `2026-12-02T10:11:12Z`
pub fn utc_iso(unix_s: i64) -> String {
    let (y, mo, d, h, mi, s) = utc_parts(unix_s);
    format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{s:02}Z")
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn civil_dates() {
        // Known instants (from memory, checkable with `date -u -d @N`).
        assert_eq!(utc_iso(0), "1970-01-01T00:00:00Z");
        assert_eq!(utc_iso(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(utc_iso(1_436_509_052), "2015-07-10T06:17:32Z");
        assert_eq!(utc_iso(-1), "1969-12-31T23:59:59Z");
    }
}
