//! A recording or candump log on disk as a restartable event source, and
//! the check that a file given to replay holds events at all.

use std::fs::File;
use std::path::{Path, PathBuf};

use super::{EventSource, RewindError, SourcePosition};
use crate::event::{Event, SourceTable};
use crate::record::{Header, ReadStats, RecordingError, RecordingReader};

/// Events read from a file, from the start again on rewind.
pub struct FileSource {
    path: PathBuf,
    reader: RecordingReader<File>,
    /// The last event's time, read from the file's tail when opened.
    end_ns: Option<crate::event::TimeNs>,
}

impl FileSource {
    pub fn open(path: &Path) -> Result<FileSource, RecordingError> {
        let reader = RecordingReader::open(path)?;
        Ok(FileSource { path: path.to_path_buf(), reader, end_ns: crate::record::reader::last_event_time(path) })
    }

    pub fn header(&self) -> &Header {
        &self.reader.header
    }

    pub fn reader(&self) -> &RecordingReader<File> {
        &self.reader
    }

    /// Whether the file is mostly events: of its first lines that are not
    /// blank or declarations (at least [`PROBE_LINES`], read up to the
    /// event that reaches that count), at least half must be events, and
    /// there must be one. A config file, a README
    /// or a binary file is refused before anything is played or recorded,
    /// rather than replayed as a handful of lucky lines among hundreds of
    /// skipped ones.
    pub fn probe(path: &Path) -> Result<(), NotEvents> {
        let mut r = RecordingReader::open(path).map_err(NotEvents::Open)?;
        // The time-order stage may hold some of the events read (a log's
        // first events all within its reordering window): count those too.
        while r.events_parsed() + r.stats.malformed < PROBE_LINES && r.next_event().is_some() {}
        let (events, bad) = (r.events_parsed(), r.stats.malformed);
        let read = events + bad;
        if events > 0 && events >= bad {
            return Ok(());
        }
        // Refused: read on to the end, so the skipped lines can be said
        // with their places (a file given by mistake is small).
        r.drain();
        let path = path.display().to_string();
        let stats = Box::new(r.stats.clone());
        if events == 0 {
            return Err(NotEvents::NoEvents { path, stats });
        }
        Err(NotEvents::MostlyNotEvents { path, events, lines: read, stats })
    }
}

/// Lines [`FileSource::probe`] reads before it judges a file.
pub const PROBE_LINES: u64 = 64;

/// A file that is not a recording or a CAN log.
#[derive(Debug, thiserror::Error)]
pub enum NotEvents {
    /// The file could not be opened or its recording header is damaged.
    #[error(transparent)]
    Open(RecordingError),
    /// Not one event in the file's first lines (an empty file, a
    /// recording with only its header, a text that is not a log); what
    /// reading the whole file found.
    #[error("{path}: no valid event in the file: not a termvel recording or candump log")]
    NoEvents { path: String, stats: Box<ReadStats> },
    /// Fewer than half of the first lines are events; what reading the
    /// whole file found.
    #[error(
        "{path}: only {events} of its first {lines} lines are events: not a termvel recording or candump log, refused"
    )]
    MostlyNotEvents { path: String, events: u64, lines: u64, stats: Box<ReadStats> },
}

impl NotEvents {
    /// What reading found, when the file was read.
    pub fn read_stats(&self) -> Option<&ReadStats> {
        match self {
            NotEvents::Open(_) => None,
            NotEvents::NoEvents { stats, .. } | NotEvents::MostlyNotEvents { stats, .. } => Some(stats),
        }
    }
}

impl EventSource for FileSource {
    fn next_event(&mut self) -> Option<Event> {
        self.reader.next_event()
    }

    fn sources(&self) -> &SourceTable {
        &self.reader.header.sources
    }

    fn rewind(&mut self) -> Result<(), RewindError> {
        self.reader = RecordingReader::open(&self.path)?;
        Ok(())
    }

    fn read_stats(&self) -> ReadStats {
        self.reader.stats.clone()
    }

    fn position(&self) -> Option<SourcePosition> {
        self.reader.position().map(SourcePosition)
    }

    fn resume(&mut self, pos: &SourcePosition) -> Result<(), RewindError> {
        Ok(self.reader.resume(&pos.0)?)
    }

    fn end_ns(&self) -> Option<crate::event::TimeNs> {
        self.end_ns
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn repo(p: &str) -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join(p)
    }

    // Issue 15, item 4: `replay config/vehicle.toml` waited for data
    // forever and `replay README.md` replayed 5 events picked out of 604
    // lines; a file that is mostly not events is refused at once.
    #[test]
    fn files_that_are_not_events_are_refused_and_logs_are_not() {
        for f in ["config/vehicle.toml", "README.md"] {
            let e = FileSource::probe(&repo(f)).unwrap_err().to_string();
            assert!(e.contains("not a termvel recording or candump log"), "{f}: {e}");
            assert!(e.contains(f), "{f}: names the file: {e}");
        }
        FileSource::probe(&repo("replays/demo.tvrec")).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let log = dir.path().join("a.log");
        // A candump log with a few bad lines among many good ones is fine.
        let mut text = String::from("garbage\n\n");
        for i in 0..70 {
            text.push_str(&format!("(1.{i:06}) can0 123#00\n"));
        }
        std::fs::write(&log, &text).unwrap();
        FileSource::probe(&log).unwrap();
        // A recording with only its header holds nothing to replay.
        let header_only = dir.path().join("h.tvrec");
        let src = FileSource::open(&repo("replays/demo.tvrec")).unwrap();
        let cfg = src.header().config_set(&[], &repo("replays/demo.tvrec")).unwrap().0;
        let (w, p) = crate::record::create_recording(dir.path(), "t", &cfg, src.sources()).unwrap();
        drop(w);
        std::fs::rename(&p, &header_only).unwrap();
        let e = FileSource::probe(&header_only).unwrap_err().to_string();
        assert!(e.contains("no valid event in the file"), "{e}");
        // Half bad, half good: refused below half only.
        let mut text = String::new();
        for i in 0..40 {
            text.push_str(&format!("(1.{i:06}) can0 123#00\nnot a frame\n"));
        }
        std::fs::write(&log, &text).unwrap();
        FileSource::probe(&log).unwrap();
        std::fs::write(&log, text.replacen("(1.000000) can0 123#00", "x", 1)).unwrap();
        assert!(FileSource::probe(&log).is_err());
    }
}
