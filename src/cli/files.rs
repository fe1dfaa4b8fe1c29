//! The command line's rules for the files it is given: an output never replaced without
//! `--force` (exit 2), a small input read whole within a limit. How a log is opened and
//! kept is `crate::logs`'.

use std::fs::{File, OpenOptions};
use std::io;
use std::path::Path;

use anyhow::{anyhow, Context};

use super::{BadInput, Failure, Runtime};

/// The rule for a log named on the command line (`record --out`, `watch --log`): an
/// existing file is refused (exit 2) unless `append` adds to it or `force` replaces it.
pub fn refuse_existing(path: &Path, append: bool, force: bool) -> Result<(), Failure> {
    if path.exists() && !append && !force {
        return Err(anyhow!(
            "{} already exists; add --append to add to it or --force to replace it",
            path.display()
        ))
        .bad_input();
    }
    Ok(())
}

/// Creates `path` for writing; an existing file is refused (exit 2) unless `force`.
pub fn create(path: &Path, force: bool) -> Result<File, Failure> {
    let mut options = OpenOptions::new();
    options.write(true);
    if force {
        options.create(true).truncate(true);
    } else {
        options.create_new(true);
    }
    match options.open(path) {
        Err(e) if e.kind() == io::ErrorKind::AlreadyExists => Err(anyhow!(
            "{} already exists; choose another --out or add --force to replace it",
            path.display()
        ))
        .bad_input(),
        other => other
            .with_context(|| format!("cannot create {}", path.display()))
            .runtime(),
    }
}

/// Reads a small input file whole, at most `limit` bytes: a FIFO or a device (which may
/// never end, as /dev/zero) is refused before it is read, a longer file at the limit.
pub fn read_bounded(path: &Path, limit: u64, what: &str) -> Result<Vec<u8>, Failure> {
    use std::io::Read as _;
    let name = path.display();
    let meta = std::fs::metadata(path)
        .with_context(|| format!("cannot read {what} {name}; check the path"))
        .bad_input()?;
    if !meta.is_file() {
        return Err(anyhow!(
            "{what} {name} is not a regular file (a FIFO, a device or a folder); give the \
             path of a file"
        ))
        .bad_input();
    }
    let mut bytes = Vec::new();
    File::open(path)
        .and_then(|file| file.take(limit + 1).read_to_end(&mut bytes))
        .with_context(|| format!("cannot read {what} {name}"))
        .bad_input()?;
    if bytes.len() as u64 > limit {
        return Err(anyhow!(
            "{what} {name} is over {} MiB, more than it could ever need; give the right file",
            limit >> 20
        ))
        .bad_input();
    }
    Ok(bytes)
}
