//! Command-line definition and dispatch; each subcommand lives in its own module.
//! Exit codes: 0 success, 1 runtime failure, 2 bad usage or bad input.

/// Writes a line to standard error. A closed or full standard error (`2>/dev/full`)
/// loses the message, never the run: `eprintln!` would panic there.
macro_rules! say_err {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stderr(), $($arg)*);
    }};
}
pub(crate) use say_err;

pub mod calibrate;
mod check;
mod convert;
mod files;
mod fit;
mod metrics_serve;
mod ports;
mod record;
mod report;
mod run_plan;
mod sim;
mod source_args;
mod summary;
mod watch;

use std::io::Write;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// How a command failed, which decides the exit code.
#[derive(Debug)]
pub enum Failure {
    /// The user's input was wrong: exit 2.
    BadInput(anyhow::Error),
    /// Something went wrong while running: exit 1.
    Runtime(anyhow::Error),
}

/// Marks an error as the user's input being wrong.
pub trait BadInput<T> {
    /// Wraps the error as bad input.
    fn bad_input(self) -> Result<T, Failure>;
}

impl<T, E: Into<anyhow::Error>> BadInput<T> for Result<T, E> {
    fn bad_input(self) -> Result<T, Failure> {
        self.map_err(|e| Failure::BadInput(e.into()))
    }
}

/// Marks an error as a failure while running.
pub trait Runtime<T> {
    /// Wraps the error as a runtime failure.
    fn runtime(self) -> Result<T, Failure>;
}

impl<T, E: Into<anyhow::Error>> Runtime<T> for Result<T, E> {
    fn runtime(self) -> Result<T, Failure> {
        self.map_err(|e| Failure::Runtime(e.into()))
    }
}

#[derive(Parser)]
#[command(
    name = "dbtrail",
    version,
    about = "Calibrated RF power from low-cost diode and log-amp detectors",
    after_help = SAFETY_NOTE
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

const SAFETY_NOTE: &str =
    "Safety: RF power can burn and exposure has limits; keep within the ratings of \
loads, attenuators and detectors; transmit only as your licence and local regulations allow. \
Local codes and licensed practice come first.";

#[derive(Subcommand)]
enum Command {
    /// Show a power or voltage level in every form: dBm, dBW, W, Vrms, Vpk, Vpp.
    Convert(convert::Args),
    /// Validate a detector profile and summarise its span, resolution and fit.
    Check(check::Args),
    /// Fit a detector model to a points CSV and write a profile.
    Fit(fit::Args),
    /// The live screen: power from a port, a capture or the simulator, for tuning and peaking.
    Watch(watch::Args),
    /// Calibrate a detector: apply known levels, let dbtrail measure, save a profile.
    Calibrate(calibrate::Args),
    /// Record calibrated power to CSV from a port, a capture or the simulator.
    Record(record::Args),
    /// Report on a recorded soak: mean, drift, settling, gaps, and a plot.
    Report(report::Args),
    /// Stream simulated detector samples to a file, standard output or a pseudo-terminal.
    Sim(sim::Args),
    /// List the serial ports on this machine.
    Ports,
}

/// Parses the command line, runs the command and turns the outcome into an exit code.
pub fn run() -> ExitCode {
    let cli = Cli::parse();
    let outcome = match cli.command {
        Command::Convert(args) => convert::run(args),
        Command::Check(args) => check::run(args),
        Command::Fit(args) => fit::run(args),
        Command::Watch(args) => watch::run(args),
        Command::Calibrate(args) => calibrate::run(args),
        Command::Record(args) => record::run(args),
        Command::Report(args) => report::run(args),
        Command::Sim(args) => sim::run(args),
        Command::Ports => ports::run(),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        // Every command's output may go to a reader that stops early (`| head`): that is
        // a normal end, as for any filter, not a failure to report.
        Err(Failure::Runtime(e)) if is_closed_pipe(Some(e.as_ref())) => ExitCode::SUCCESS,
        Err(Failure::BadInput(e)) => report(&e, 2),
        Err(Failure::Runtime(e)) => report(&e, 1),
    }
}

fn report(error: &anyhow::Error, code: u8) -> ExitCode {
    say_err!("dbtrail: error: {error:#}");
    ExitCode::from(code)
}

/// Whether an error is, or wraps, the reader of a pipe having gone away.
pub fn is_closed_pipe(error: Option<&(dyn std::error::Error + 'static)>) -> bool {
    let Some(error) = error else { return false };
    let io = error.downcast_ref::<std::io::Error>();
    if io.is_some_and(|e| e.kind() == std::io::ErrorKind::BrokenPipe) {
        return true;
    }
    // The csv writer's error names no source, so its own I/O error is looked into here.
    let from_csv = error
        .downcast_ref::<csv::Error>()
        .and_then(|e| match e.kind() {
            csv::ErrorKind::Io(io) => Some(io as _),
            _ => None,
        });
    let wrapped = io.and_then(|e| e.get_ref()).map(|inner| inner as _);
    is_closed_pipe(from_csv.or(wrapped).or_else(|| error.source()))
}

/// Writes command output to stdout; a closed pipe (`| head`) is not an error.
pub fn emit(text: &str) -> Result<(), Failure> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(Failure::Runtime(
            anyhow::Error::new(e).context("cannot write to standard output"),
        )),
        _ => Ok(()),
    }
}

/// Parses a reference impedance given on the command line.
pub fn parse_ohms(text: &str) -> Result<f64, String> {
    let trimmed = text
        .trim()
        .trim_end_matches(['Ω', 'Ω'])
        .trim_end_matches("ohms")
        .trim_end_matches("ohm");
    match trimmed.trim().parse::<f64>() {
        Ok(r) if r.is_finite() && r > 0.0 => Ok(r),
        _ => Err(format!(
            "`{text}` is not an impedance; give a positive number of ohms, e.g. 50 or 75"
        )),
    }
}

/// clap adapter for a dB figure such as `20dB`.
pub fn parse_db_arg(text: &str) -> Result<f64, String> {
    dbtrail::units::parse_db(text).map_err(|e| e.to_string())
}

/// clap adapter for a duration such as `1h30m`.
pub fn parse_duration_arg(text: &str) -> Result<std::time::Duration, String> {
    dbtrail::units::parse_duration(text).map_err(|e| e.to_string())
}

/// clap adapter for ADC counts: a finite number, fractional for an average.
pub fn parse_counts_arg(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v >= 0.0 => Ok(v),
        Ok(v) if v < 0.0 => Err(format!(
            "`{text}` is below zero, and an ADC never gives negative counts; give counts \
             such as 1234 or 1234.5"
        )),
        _ => Err(format!(
            "`{text}` is not a number of ADC counts; give counts such as 1234 or 1234.5"
        )),
    }
}

/// clap adapter for a plain finite number (volts, a ratio, kelvin); the option's own
/// checks give its range.
pub fn parse_number_arg(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        _ => Err(format!("`{text}` is not a finite number")),
    }
}

/// clap adapter for a frequency such as `145.5MHz`.
pub fn parse_frequency_arg(text: &str) -> Result<f64, String> {
    dbtrail::units::parse_frequency(text).map_err(|e| e.to_string())
}

#[cfg(test)]
mod tests {
    use super::is_closed_pipe;
    use std::io::{Error, ErrorKind};

    /// A pipe whose reader has gone.
    struct Closed;
    impl std::io::Write for Closed {
        fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
            Err(ErrorKind::BrokenPipe.into())
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Err(ErrorKind::BrokenPipe.into())
        }
    }

    // Source: the exit-code rule in docs/reliability.md: a reader that stops early is a
    // normal end; the broken pipe may come bare, wrapped in another io::Error, or under
    // anyhow's context.
    #[test]
    fn a_closed_pipe_is_found_however_it_is_wrapped() {
        let bare = Error::from(ErrorKind::BrokenPipe);
        assert!(is_closed_pipe(Some(&bare)));
        let wrapped = Error::other(Error::from(ErrorKind::BrokenPipe));
        assert!(is_closed_pipe(Some(&wrapped)));
        let context = anyhow::Error::new(Error::from(ErrorKind::BrokenPipe)).context("writing");
        assert!(is_closed_pipe(Some(context.as_ref())));
        let mut writer = csv::Writer::from_writer(Closed);
        let from_csv = writer
            .write_record(["a"])
            .and_then(|()| Ok(writer.flush()?));
        assert!(is_closed_pipe(Some(&Error::other(from_csv.unwrap_err()))));
        let full = anyhow::Error::new(Error::from(ErrorKind::StorageFull)).context("writing");
        assert!(!is_closed_pipe(Some(full.as_ref())));
        assert!(!is_closed_pipe(None));
    }
}
