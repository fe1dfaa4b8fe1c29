//! Logs as every writer keeps them, `record`'s and the screen's alike: opened one way
//! ([`LogFile::open`] with [`IfExists`]), locked against a second writer and checked at
//! each sync that nobody truncated or replaced them; written by the rules of
//! [`LogKeeper`] (flush after each batch, fsync every few seconds and at the end, a live
//! source's intervals closed a little behind its clock).

use std::fs::{File, OpenOptions};
use std::io;
use std::os::unix::fs::MetadataExt;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use dbtrail::record::Recorder;

/// How often a log's rows are forced to disk.
const SYNC_EVERY: Duration = Duration::from_secs(2);
/// How far behind the clock a live source's intervals are closed, so that samples still
/// in the ring land in their own interval.
pub const LIVE_GRACE_S: f64 = 0.1;

/// Where a log's rows go, and how to make them durable.
pub trait Durable: io::Write {
    /// Forces what was written to the disk, where the target can be.
    fn make_durable(&self) -> io::Result<()>;
}

impl Durable for LogFile {
    fn make_durable(&self) -> io::Result<()> {
        self.sync_and_check()
    }
}

impl Durable for io::Stdout {
    fn make_durable(&self) -> io::Result<()> {
        Ok(())
    }
}

/// The rows of a recorder kept only for its figures (the screen's metrics).
impl Durable for io::Sink {
    fn make_durable(&self) -> io::Result<()> {
        Ok(())
    }
}

impl<D: Durable + ?Sized> Durable for Box<D> {
    fn make_durable(&self) -> io::Result<()> {
        (**self).make_durable()
    }
}

/// The rules every log is written by, `record`'s and the screen's alike: after each batch
/// of events a live source's intervals are closed [`LIVE_GRACE_S`] behind its clock and
/// the rows flushed; they are made durable every [`SYNC_EVERY`] while rows are added, and
/// at the end.
pub struct LogKeeper {
    synced: Instant,
    synced_rows: u64,
}

impl LogKeeper {
    /// A keeper for a log just opened.
    pub fn new() -> Self {
        LogKeeper {
            synced: Instant::now(),
            synced_rows: 0,
        }
    }

    /// After a batch of events; `live_clock` is a live source's time now.
    pub fn after_batch<W: Durable>(
        &mut self,
        recorder: &mut Recorder<W>,
        live_clock: Option<f64>,
    ) -> io::Result<()> {
        if let Some(now) = live_clock {
            recorder.advance(now - LIVE_GRACE_S)?;
        }
        recorder.flush()?;
        if recorder.rows() != self.synced_rows && self.synced.elapsed() >= SYNC_EVERY {
            recorder.get_ref().make_durable()?;
            self.synced_rows = recorder.rows();
            self.synced = Instant::now();
        }
        Ok(())
    }

    /// Ends the log at `end_t` (its last, partial interval written) and makes it durable.
    pub fn finish<W: Durable>(recorder: &mut Recorder<W>, end_t: f64) -> io::Result<()> {
        recorder.finish(end_t)?;
        recorder.get_ref().make_durable()
    }
}

/// Forces written data to the disk. A target that cannot be synced (a pipe, a FIFO, a
/// terminal, /dev/null) refuses with EINVAL or ENOTSUP: there is nothing to make durable,
/// so that is not an error.
pub fn sync(file: &File) -> io::Result<()> {
    match file.sync_data() {
        Err(e)
            if matches!(
                e.kind(),
                io::ErrorKind::InvalidInput | io::ErrorKind::Unsupported
            ) =>
        {
            Ok(())
        }
        other => other,
    }
}

/// A log being recorded: opened once, locked against a second recorder, and checked at
/// every sync that nobody else truncated, deleted or replaced it meanwhile.
pub struct LogFile {
    file: File,
    path: PathBuf,
    /// A regular file, whose length and identity can be checked.
    regular: bool,
    len_at_open: u64,
    identity: (u64, u64),
    written: std::cell::Cell<u64>,
}

/// Someone else changed the log under the recorder.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct LogTampered(String);

/// What opening a log does with a file of its name that already exists.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IfExists {
    /// Refuses it (the screen's `l` key, and `--log` alone).
    Refuse,
    /// Adds to its end.
    Append,
    /// Empties it, once the lock is taken.
    Replace,
}

/// Why a log could not be opened; each front end says what to do its own way.
#[derive(Debug, thiserror::Error)]
pub enum LogOpenError {
    /// A file of that name exists, and was not to be replaced.
    #[error("{} already exists", .0.display())]
    Exists(PathBuf),
    /// Another recorder holds the file's lock.
    #[error("{} is being written by another dbtrail (it holds the file's lock)", .0.display())]
    Locked(PathBuf),
    /// The file could not be opened, read, locked or emptied.
    #[error("cannot {what} {}: {source}", .path.display())]
    Io {
        what: &'static str,
        path: PathBuf,
        source: io::Error,
    },
}

impl LogFile {
    /// Opens `path` for a log, as `if_exists` says, locked against a second recorder.
    pub fn open(path: &Path, if_exists: IfExists) -> Result<LogFile, LogOpenError> {
        let failed = |what| {
            move |source| LogOpenError::Io {
                what,
                path: path.to_path_buf(),
                source,
            }
        };
        // Appending even to a file just emptied: a truncation by someone else then shows
        // as a short file, where writing on at our own offset would leave a hole.
        let mut options = OpenOptions::new();
        options.read(true).append(true);
        match if_exists {
            IfExists::Refuse => options.create_new(true),
            IfExists::Append | IfExists::Replace => options.create(true),
        };
        let file = match options.open(path) {
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {
                return Err(LogOpenError::Exists(path.to_path_buf()))
            }
            other => other.map_err(failed("open"))?,
        };
        let meta = file.metadata().map_err(failed("read the state of"))?;
        let regular = meta.is_file();
        let append = if_exists == IfExists::Append;
        if regular {
            match file.try_lock() {
                Ok(()) => {}
                Err(std::fs::TryLockError::WouldBlock) => {
                    return Err(LogOpenError::Locked(path.to_path_buf()))
                }
                Err(std::fs::TryLockError::Error(e)) => return Err(failed("lock")(e)),
            }
            if !append {
                file.set_len(0).map_err(failed("empty"))?;
            }
        }
        Ok(LogFile {
            len_at_open: if append && regular { meta.len() } else { 0 },
            identity: (meta.dev(), meta.ino()),
            file,
            path: path.to_path_buf(),
            regular,
            written: std::cell::Cell::new(0),
        })
    }

    /// Bytes the file held when it was opened for adding to (0 when replaced).
    pub fn len_at_open(&self) -> u64 {
        self.len_at_open
    }

    /// The open file, to read an earlier log through.
    pub fn file(&self) -> &File {
        &self.file
    }

    /// Syncs, then checks that the file still holds every byte written, under its name.
    pub fn sync_and_check(&self) -> io::Result<()> {
        sync(&self.file)?;
        if !self.regular {
            return Ok(());
        }
        let name = self.path.display();
        let meta = self.file.metadata()?;
        let expected = self.len_at_open + self.written.get();
        let problem = if meta.nlink() == 0 {
            Some(format!("{name} was deleted while recording"))
        } else if std::fs::metadata(&self.path)
            .map_or(true, |m| (m.dev(), m.ino()) != self.identity)
        {
            Some(format!("{name} was moved or replaced while recording"))
        } else if meta.len() < expected {
            Some(format!(
                "{name} was truncated while recording: it holds {} bytes of the {expected} \
                 written",
                meta.len()
            ))
        } else {
            None
        };
        match problem {
            Some(what) => Err(io::Error::other(LogTampered(format!(
                "{what} (by another program); the rows written since are not in it"
            )))),
            None => Ok(()),
        }
    }
}

impl io::Write for LogFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let n = self.file.write(buf)?;
        self.written.set(self.written.get() + n as u64);
        Ok(n)
    }

    fn flush(&mut self) -> io::Result<()> {
        self.file.flush()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write as _;

    #[test]
    fn a_log_opens_as_asked_of_a_file_that_exists() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("bench.csv");
        std::fs::write(&path, "earlier rows\n").unwrap();
        assert!(matches!(
            LogFile::open(&path, IfExists::Refuse),
            Err(LogOpenError::Exists(_))
        ));
        let appended = LogFile::open(&path, IfExists::Append).unwrap();
        assert_eq!(
            appended.len_at_open(),
            13,
            "the earlier rows are kept and counted"
        );
        drop(appended);
        let mut replaced = LogFile::open(&path, IfExists::Replace).unwrap();
        assert_eq!(replaced.len_at_open(), 0);
        replaced.write_all(b"new\n").unwrap();
        replaced.sync_and_check().unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "new\n");
        let fresh = dir.path().join("fresh.csv");
        LogFile::open(&fresh, IfExists::Refuse).unwrap();
        assert!(fresh.exists());
    }

    #[test]
    fn a_log_held_by_another_writer_is_refused_whatever_is_asked() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("held.csv");
        let _held = LogFile::open(&path, IfExists::Replace).unwrap();
        for how in [IfExists::Append, IfExists::Replace] {
            let refused = LogFile::open(&path, how);
            assert!(
                matches!(refused, Err(LogOpenError::Locked(_))),
                "{how:?}: {:?}",
                refused.err()
            );
        }
    }
}
