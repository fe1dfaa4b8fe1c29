//! The `dbtrail` command: a thin layer of command-line parsing over the library.

mod cli;
mod source;

fn main() -> std::process::ExitCode {
    cli::run()
}
