//! A recording or candump log on disk as a restartable event source.

use std::fs::File;
use std::path::{Path, PathBuf};

use super::{EventSource, RewindError};
use crate::event::{Event, SourceTable};
use crate::record::{Header, ReadStats, RecordingError, RecordingReader};

/// Events read from a file, from the start again on rewind.
pub struct FileSource {
    path: PathBuf,
    reader: RecordingReader<File>,
}

impl FileSource {
    pub fn open(path: &Path) -> Result<FileSource, RecordingError> {
        Ok(FileSource { path: path.to_path_buf(), reader: RecordingReader::open(path)? })
    }

    pub fn header(&self) -> &Header {
        &self.reader.header
    }

    pub fn reader(&self) -> &RecordingReader<File> {
        &self.reader
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
}
