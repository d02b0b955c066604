//! Output files that appear only when complete.
//!
//! An [`AtomicFile`] writes to `.<name>.ebbwise-partial` beside the target and renames it onto the
//! target on [`AtomicFile::commit`]. Dropped without commit (an error, a panic), it removes the
//! temporary. A run killed outright leaves only the clearly named temporary, which
//! [`remove_stale_partials`] deletes at the start of the next run.
//!
//! A command that writes one data file can also hand it to a stream the caller owns (the
//! `ebbwise` command's standard output): [`Sink`] names either, [`SinkWriter`] writes to it.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use super::error::IoError;

/// Suffix of temporary output files.
pub const PARTIAL_SUFFIX: &str = ".ebbwise-partial";

/// A file being written under a temporary name.
pub struct AtomicFile {
    target: PathBuf,
    temp: PathBuf,
    writer: Option<BufWriter<File>>,
    unsynced: usize,
    /// The background sync of what was written so far, if one is running.
    syncing: Option<std::thread::JoinHandle<std::io::Result<()>>>,
}

/// Written bytes are handed to the disk every this many bytes, on a background thread, so that
/// the final sync before the rename is short and the flushing overlaps with the work.
const SYNC_EVERY_BYTES: usize = 64 << 20;

impl AtomicFile {
    /// Creates the temporary file for `target`. Refuses to write over any of `inputs`.
    pub fn create(target: &Path, inputs: &[&Path]) -> Result<Self, IoError> {
        if let Ok(t) = target.canonicalize() {
            for i in inputs {
                if i.canonicalize().map(|c| c == t).unwrap_or(false) {
                    return Err(IoError::file(
                        target,
                        std::io::Error::other("refusing to overwrite an input file"),
                    ));
                }
            }
        }
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "output".into());
        let temp = target.with_file_name(format!(".{name}{PARTIAL_SUFFIX}"));
        let f = File::create(&temp).map_err(|e| IoError::file(&temp, e))?;
        Ok(AtomicFile {
            target: target.to_path_buf(),
            temp,
            writer: Some(BufWriter::with_capacity(256 * 1024, f)),
            unsynced: 0,
            syncing: None,
        })
    }

    /// The final path.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Writes bytes.
    pub fn write_all(&mut self, bytes: &[u8]) -> Result<(), IoError> {
        let w = self.writer.as_mut().expect("writer present until commit");
        w.write_all(bytes)
            .map_err(|e| IoError::file(&self.temp, e))?;
        self.unsynced += bytes.len();
        if self.unsynced >= SYNC_EVERY_BYTES {
            self.unsynced = 0;
            w.flush().map_err(|e| IoError::file(&self.temp, e))?;
            // One background sync at a time: wait for the previous one (normally long done),
            // then hand the file's written pages to the disk without blocking the writer.
            self.wait_for_sync()?;
            let w = self.writer.as_ref().expect("writer present until commit");
            let f = w
                .get_ref()
                .try_clone()
                .map_err(|e| IoError::file(&self.temp, e))?;
            self.syncing = Some(std::thread::spawn(move || f.sync_data()));
        }
        Ok(())
    }

    fn wait_for_sync(&mut self) -> Result<(), IoError> {
        if let Some(h) = self.syncing.take() {
            h.join()
                .unwrap_or_else(|_| Err(std::io::Error::other("sync thread panicked")))
                .map_err(|e| IoError::file(&self.temp, e))?;
        }
        Ok(())
    }

    /// Flushes, syncs and renames onto the target.
    pub fn commit(mut self) -> Result<PathBuf, IoError> {
        self.wait_for_sync()?;
        let w = self.writer.take().expect("writer present until commit");
        let f = w
            .into_inner()
            .map_err(|e| IoError::file(&self.temp, e.into_error()))?;
        f.sync_all().map_err(|e| IoError::file(&self.temp, e))?;
        drop(f);
        std::fs::rename(&self.temp, &self.target).map_err(|e| IoError::file(&self.target, e))?;
        Ok(self.target.clone())
    }
}

/// For writers that take any `std::io::Write` (the Parquet writer): every write goes through
/// [`AtomicFile::write_all`], so the background syncs happen as for any other output.
impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        AtomicFile::write_all(self, buf).map_err(|e| std::io::Error::other(e.to_string()))?;
        Ok(buf.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.writer.is_some() {
            self.writer = None;
            let _ = std::fs::remove_file(&self.temp);
        }
    }
}

/// Writes a whole file atomically.
pub fn write_atomic(target: &Path, bytes: &[u8]) -> Result<PathBuf, IoError> {
    let mut f = AtomicFile::create(target, &[])?;
    f.write_all(bytes)?;
    f.commit()
}

/// Where one output goes.
pub enum Sink<'a> {
    /// A file, written through an [`AtomicFile`].
    File(&'a Path),
    /// A stream the caller owns (standard output, say), written as the data comes.
    Stream(&'a mut dyn Write),
}

impl Sink<'_> {
    /// The file, when the output goes to one.
    pub fn path(&self) -> Option<&Path> {
        match self {
            Sink::File(p) => Some(p),
            Sink::Stream(_) => None,
        }
    }
}

impl std::fmt::Debug for Sink<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Sink::File(p) => f.debug_tuple("File").field(p).finish(),
            Sink::Stream(_) => f.write_str("Stream"),
        }
    }
}

/// Name used in the errors of a [`Sink::Stream`].
const STREAM_NAME: &str = "(output stream)";

/// An open [`Sink`].
pub enum SinkWriter<'a> {
    /// To a file under its temporary name.
    File(AtomicFile),
    /// To the caller's stream.
    Stream(&'a mut dyn Write),
}

impl<'a> SinkWriter<'a> {
    /// Opens `sink`; a file refuses to write over any of `inputs`.
    pub fn open(sink: Sink<'a>, inputs: &[&Path]) -> Result<Self, IoError> {
        Ok(match sink {
            Sink::File(p) => SinkWriter::File(AtomicFile::create(p, inputs)?),
            Sink::Stream(w) => SinkWriter::Stream(w),
        })
    }

    /// Writes bytes.
    pub fn write_all(&mut self, bytes: &[u8]) -> Result<(), IoError> {
        match self {
            SinkWriter::File(f) => f.write_all(bytes),
            SinkWriter::Stream(w) => w
                .write_all(bytes)
                .map_err(|e| IoError::file(Path::new(STREAM_NAME), e)),
        }
    }

    /// Completes the output: a file is committed (its path returned), a stream flushed.
    pub fn finish(self) -> Result<Option<PathBuf>, IoError> {
        match self {
            SinkWriter::File(f) => f.commit().map(Some),
            SinkWriter::Stream(w) => {
                w.flush()
                    .map_err(|e| IoError::file(Path::new(STREAM_NAME), e))?;
                Ok(None)
            }
        }
    }
}

/// Deletes temporaries left in `dir` by an interrupted run. Returns how many.
pub fn remove_stale_partials(dir: &Path) -> usize {
    let Ok(rd) = std::fs::read_dir(dir) else {
        return 0;
    };
    rd.filter_map(Result::ok)
        .filter(|e| {
            let n = e.file_name();
            let n = n.to_string_lossy();
            n.starts_with('.') && n.ends_with(PARTIAL_SUFFIX)
        })
        .filter(|e| std::fs::remove_file(e.path()).is_ok())
        .count()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn appears_only_on_commit_and_cleans_up_otherwise() {
        let d = tempfile::tempdir().unwrap();
        let target = d.path().join("out.csv");
        let mut f = AtomicFile::create(&target, &[]).unwrap();
        f.write_all(b"a,b\n").unwrap();
        assert!(!target.exists());
        assert!(d.path().join(".out.csv.ebbwise-partial").exists());
        f.commit().unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"a,b\n");
        let mut g = AtomicFile::create(&d.path().join("x.csv"), &[]).unwrap();
        g.write_all(b"half").unwrap();
        drop(g);
        assert!(!d.path().join("x.csv").exists());
        assert!(!d.path().join(".x.csv.ebbwise-partial").exists());
        std::fs::write(d.path().join(".y.csv.ebbwise-partial"), b"stale").unwrap();
        assert_eq!(remove_stale_partials(d.path()), 1);
    }

    #[test]
    fn refuses_to_overwrite_an_input() {
        let d = tempfile::tempdir().unwrap();
        let input = d.path().join("in.csv");
        std::fs::write(&input, b"x").unwrap();
        assert!(AtomicFile::create(&input, &[&input]).is_err());
        assert_eq!(std::fs::read(&input).unwrap(), b"x");
    }

    #[test]
    fn a_stream_sink_gets_the_bytes_and_names_no_file() {
        let mut buf: Vec<u8> = Vec::new();
        let mut w = SinkWriter::open(Sink::Stream(&mut buf), &[]).unwrap();
        w.write_all(b"a,b\n").unwrap();
        w.write_all(b"1,2\n").unwrap();
        assert_eq!(w.finish().unwrap(), None);
        assert_eq!(buf, b"a,b\n1,2\n");
        let d = tempfile::tempdir().unwrap();
        let target = d.path().join("f.csv");
        let mut w = SinkWriter::open(Sink::File(&target), &[]).unwrap();
        w.write_all(b"x").unwrap();
        assert!(!target.exists(), "not before finish");
        assert_eq!(w.finish().unwrap(), Some(target.clone()));
        assert_eq!(std::fs::read(&target).unwrap(), b"x");
    }
}
