//! The `dbtrail` command: a thin layer of command-line parsing over the library.
#![forbid(unsafe_code)]

// Signals (SIGHUP among them), pseudo-terminals and the log's device-and-inode checks are
// POSIX, and the program is tested on Linux only (README.md, Platform).
#[cfg(not(unix))]
compile_error!("dbtrail builds on POSIX systems only, and is tested on Linux: see README.md");

mod cli;
mod desk;
mod endpoint;
mod logs;
mod signals;
mod source;
mod tui;

fn main() -> std::process::ExitCode {
    cli::run()
}
