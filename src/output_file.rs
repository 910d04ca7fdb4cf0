//! Output files written whole or not at all: an export, a plot. Each is
//! written to a temporary name beside its final one (same folder, so the
//! same file system) and renamed over it only once complete and synced; a
//! failed or interrupted write leaves no partial file (the temporary is
//! removed when the [`PendingFile`] is dropped uncommitted, and a hidden
//! `.termvel-tmp-…` name is all a crash can leave).

use std::fs::File;
use std::path::{Path, PathBuf};

/// What failed when the file could not be created.
const CANNOT_CREATE: &str = "cannot create";

/// An output file that could not be written, with its path and what failed.
#[derive(Debug, thiserror::Error)]
#[error("{}: {what}: {source}", path.display())]
pub struct OutputError {
    /// The file asked for (not its temporary name).
    pub path: PathBuf,
    /// What failed, in words ("cannot create", "cannot write").
    pub what: &'static str,
    #[source]
    pub source: std::io::Error,
}

impl OutputError {
    /// Whether the file could not even be created (a folder missing, no
    /// permission): the path is unusable and nothing was written.
    pub fn is_create(&self) -> bool {
        self.what == CANNOT_CREATE
    }

    /// `what` failed on `path`.
    pub fn new<'a>(path: &'a Path, what: &'static str) -> impl FnOnce(std::io::Error) -> OutputError + 'a {
        move |source| OutputError { path: path.to_path_buf(), what, source }
    }
}

/// A file being written under a temporary name, renamed to its final name
/// by [`PendingFile::commit`].
#[derive(Debug)]
pub struct PendingFile {
    path: PathBuf,
    tmp: PathBuf,
    committed: bool,
}

impl PendingFile {
    /// The temporary beside `path` (hidden, the same extension, so a
    /// writer that picks its format by extension picks the right one);
    /// not created yet.
    pub fn beside(path: &Path) -> PendingFile {
        let dir = path.parent().unwrap_or(Path::new(""));
        let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        let tmp = dir.join(format!(".termvel-tmp-{}-{name}", std::process::id()));
        PendingFile { path: path.to_path_buf(), tmp, committed: false }
    }

    /// Creates the temporary beside `path` and opens it for writing.
    pub fn create(path: &Path) -> Result<(PendingFile, File), OutputError> {
        let p = PendingFile::beside(path);
        let f = File::create(&p.tmp).map_err(OutputError::new(path, CANNOT_CREATE))?;
        Ok((p, f))
    }

    /// The final path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The temporary path, to write to.
    pub fn tmp(&self) -> &Path {
        &self.tmp
    }

    /// The temporary is complete: sync it to disk and rename it to its
    /// final name (replacing a file there).
    pub fn commit(mut self) -> Result<PathBuf, OutputError> {
        File::open(&self.tmp).and_then(|f| f.sync_all()).map_err(OutputError::new(&self.path, "cannot write"))?;
        std::fs::rename(&self.tmp, &self.path).map_err(OutputError::new(&self.path, "cannot rename into place"))?;
        self.committed = true;
        Ok(std::mem::take(&mut self.path))
    }
}

impl Drop for PendingFile {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// Whether `out` is the file `input` (the same file once links are
/// resolved, or the same inode): writing it would destroy the input.
pub fn is_same_file(input: &Path, out: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    if let (Ok(a), Ok(b)) = (std::fs::metadata(input), std::fs::metadata(out)) {
        return a.dev() == b.dev() && a.ino() == b.ino();
    }
    match (std::fs::canonicalize(input), std::fs::canonicalize(out)) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    }
}

#[cfg(test)]
mod tests {
    use std::io::Write;

    use super::*;

    #[test]
    fn a_file_appears_only_when_committed_and_a_dropped_one_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        let (p, mut f) = PendingFile::create(&path).unwrap();
        f.write_all(b"a,b\n").unwrap();
        assert!(!path.exists(), "not before the commit");
        assert_eq!(p.commit().unwrap(), path);
        assert_eq!(std::fs::read(&path).unwrap(), b"a,b\n");
        // A write abandoned half-way (an error, a panic) leaves the old file
        // and no temporary.
        let (p, mut f) = PendingFile::create(&path).unwrap();
        f.write_all(b"half").unwrap();
        drop(p);
        assert_eq!(std::fs::read(&path).unwrap(), b"a,b\n");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    // Issue 13, item 2: `export same.tvrec --out same.tvrec` (also through
    // a symlink) replaced the recording.
    #[test]
    fn the_same_file_is_found_through_links_and_other_spellings() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("run.tvrec");
        std::fs::write(&input, b"x").unwrap();
        let link = dir.path().join("link.csv");
        std::os::unix::fs::symlink(&input, &link).unwrap();
        assert!(is_same_file(&input, &input));
        assert!(is_same_file(&input, &link));
        assert!(is_same_file(&input, &dir.path().join(".").join("run.tvrec")));
        assert!(!is_same_file(&input, &dir.path().join("run.csv")));
        let other = dir.path().join("other.tvrec");
        std::fs::write(&other, b"y").unwrap();
        assert!(!is_same_file(&input, &other));
    }
}
