//! Output files as every writer treats them: never replaced without `--force`, and made
//! durable where the target can be.

use std::fs::{File, OpenOptions};
use std::io;
use std::path::Path;

use anyhow::{anyhow, Context};

use super::{BadInput, Failure, Runtime};

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
