//! The `dbtrail` command: a thin layer of command-line parsing over the library.
#![forbid(unsafe_code)]

mod cli;
mod desk;
mod source;
mod tui;

fn main() -> std::process::ExitCode {
    cli::run()
}
