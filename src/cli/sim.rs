//! `dbtrail sim`: simulated detector samples on the wire, to a file, standard output or a
//! pseudo-terminal that `--port` can open, so the whole path can be tried without hardware.

use std::io::{self, Write};
use std::path::PathBuf;
use std::time::{Duration, Instant};

use anyhow::Context;
use dbtrail::coupler::Coupler;
use dbtrail::decode::{encode_ascii, encode_binary, Format};
use dbtrail::sim::matching::MatchBench;
use dbtrail::sim::{Scenario, SimBench, Simulator};

use super::source_args::{parse_rate, parse_scenario, DEMO_COUPLER, DEMO_PROFILE};
use super::{BadInput, Failure, Runtime};

#[derive(clap::Args)]
pub struct Args {
    /// Scenario: soak, tune, sweep, overload or match (two channels, forward and reflected)
    #[arg(long, default_value = "soak", value_parser = parse_scenario)]
    scenario: Scenario,
    /// Samples per second, e.g. 1000 or 10k
    #[arg(long, default_value = "1000", allow_hyphen_values = true, value_parser = parse_rate)]
    rate: f64,
    /// Wire format: ascii or binary
    #[arg(long, default_value = "ascii", value_parser = ["ascii", "binary"])]
    format: String,
    /// Simulated time, e.g. 10, 90s, 2h (default 10 s, or until stopped with --pty)
    #[arg(long, visible_alias = "duration", allow_hyphen_values = true, value_parser = parse_seconds)]
    seconds: Option<f64>,
    /// Seed of the noise
    #[arg(long, default_value_t = 1, allow_hyphen_values = true)]
    seed: u64,
    /// Detector profile to simulate (default: the bundled demo diode); not for match
    #[arg(long)]
    profile: Option<PathBuf>,
    /// Coupler set-up to simulate with --scenario match (default: the bundled demo coupler)
    #[arg(long, conflicts_with = "profile")]
    coupler: Option<PathBuf>,
    /// Create a pseudo-terminal, print its path on the first line, and stream in real time
    #[arg(long, conflicts_with = "out")]
    pty: bool,
    /// Write to this file instead of standard output
    #[arg(long)]
    out: Option<PathBuf>,
    /// Replace an existing --out file
    #[arg(long, requires = "out")]
    force: bool,
}

/// Seconds of simulated time: a plain number or a duration such as 90s or 2h.
fn parse_seconds(text: &str) -> Result<f64, String> {
    match super::parse_duration_arg(text)?.as_secs_f64() {
        0.0 => Err(format!("`{text}` is no time at all; give more than 0 s")),
        seconds => Ok(seconds),
    }
}

/// Simulated time written per chunk.
const CHUNK_S: f64 = 0.01;

pub fn run(args: Args) -> Result<(), Failure> {
    let simulator = bench(&args)?;
    let format = Format::from_name(&args.format).unwrap_or(Format::Ascii);
    if args.pty {
        return stream_to_pty(simulator, format, args.seconds);
    }
    let seconds = args.seconds.unwrap_or(10.0);
    match &args.out {
        Some(path) => {
            let file = super::files::create(path, args.force)?;
            let mut out = io::BufWriter::new(file);
            stream(simulator, format, Some(seconds), false, &mut out)
                .and_then(|()| out.flush())
                .with_context(|| format!("cannot write {}", path.display()))
                .runtime()
        }
        None => {
            let mut out = io::BufWriter::new(io::stdout().lock());
            match stream(simulator, format, Some(seconds), false, &mut out)
                .and_then(|()| out.flush())
            {
                Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(()),
                other => other.context("cannot write to standard output").runtime(),
            }
        }
    }
}

/// The bench the options describe: the match bench on a coupler set-up for `match`, one
/// detector on a profile for the others.
fn bench(args: &Args) -> Result<SimBench, Failure> {
    let scenario = args.scenario;
    if scenario.needs_coupler() {
        if args.profile.is_some() {
            return Err(Failure::BadInput(anyhow::anyhow!(
                "--profile describes one detector, but --scenario {} reads two on a coupler; \
                 give --coupler FILE (a coupler set-up) instead, or leave both out for the \
                 bundled demo coupler",
                scenario.name()
            )));
        }
        let coupler = load_coupler(args.coupler.as_deref())?;
        return Ok(MatchBench::new(&coupler, args.rate, args.seed).into());
    }
    if args.coupler.is_some() {
        return Err(Failure::BadInput(anyhow::anyhow!(
            "--coupler is only for --scenario match (two detectors on a coupler); --scenario \
             {} reads one detector: give --profile FILE instead",
            scenario.name()
        )));
    }
    let profile = match &args.profile {
        Some(path) => dbtrail::profile::load_profile(path).bad_input()?,
        None => {
            dbtrail::profile::parse_profile(DEMO_PROFILE, "bundled demo profile").bad_input()?
        }
    };
    Ok(Simulator::new(&profile, scenario, args.rate, args.seed).into())
}

/// The coupler set-up at `path`, or the bundled demo coupler.
fn load_coupler(path: Option<&std::path::Path>) -> Result<Coupler, Failure> {
    match path {
        Some(path) => dbtrail::coupler::load_coupler(path).bad_input(),
        None => DEMO_COUPLER.load().bad_input(),
    }
}

fn stream_to_pty(simulator: SimBench, format: Format, seconds: Option<f64>) -> Result<(), Failure> {
    let (mut master, slave) = serialport::TTYPort::pair()
        .context("cannot create a pseudo-terminal")
        .runtime()?;
    let name = serialport::SerialPort::name(&slave).unwrap_or_default();
    super::emit(&format!("{name}\n"))?;
    // Writes time out when nobody reads; the chunk is dropped, as a real device would.
    serialport::SerialPort::set_timeout(&mut master, Duration::from_millis(50)).ok();
    let result = stream(
        simulator,
        format,
        seconds,
        true,
        &mut DropOnTimeout(&mut master),
    );
    // Closing the master hangs the line up and discards what the reader has not yet
    // taken; give it a moment to take the last chunk.
    std::thread::sleep(Duration::from_millis(500));
    drop(slave);
    result
        .context("cannot write to the pseudo-terminal")
        .runtime()
}

/// A writer that gives up on a chunk the reader is too slow (or absent) to take.
struct DropOnTimeout<'a, W: Write>(&'a mut W);

impl<W: Write> Write for DropOnTimeout<'_, W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match self.0.write(buf) {
            Err(e)
                if e.kind() == io::ErrorKind::TimedOut || e.kind() == io::ErrorKind::WouldBlock =>
            {
                Ok(buf.len())
            }
            other => other,
        }
    }
    fn flush(&mut self) -> io::Result<()> {
        match self.0.flush() {
            Err(e) if e.kind() == io::ErrorKind::TimedOut => Ok(()),
            other => other,
        }
    }
}

/// Writes samples in chunks of [`CHUNK_S`], paced to the wall clock when `realtime`.
fn stream(
    mut simulator: SimBench,
    format: Format,
    seconds: Option<f64>,
    realtime: bool,
    out: &mut impl Write,
) -> io::Result<()> {
    let started = Instant::now();
    let per_chunk = (simulator.rate_hz() * CHUNK_S).ceil().max(1.0) as u64;
    let total = seconds.map(|s| (s * simulator.rate_hz()).round() as u64);
    let mut buf = Vec::with_capacity(64 * 1024);
    let mut written: u64 = 0;
    let mut seq: u16 = 0;
    let mut counts = Vec::new();
    let mut frame: Vec<u16> = Vec::new();
    let channels = simulator.channels();
    while total.is_none_or(|n| written < n) {
        buf.clear();
        let n = total.map_or(per_chunk, |n| per_chunk.min(n - written));
        counts.clear();
        let t0 = simulator.fill(n as usize, &mut counts);
        let t = t0 + (n.saturating_sub(1)) as f64 / simulator.rate_hz();
        for sample in counts.chunks_exact(channels) {
            match format {
                Format::Binary => {
                    frame.clear();
                    frame.extend(sample.iter().map(|&c| c.min(u32::from(u16::MAX)) as u16));
                    encode_binary(seq, &frame, &mut buf);
                    seq = seq.wrapping_add(1);
                }
                _ => encode_ascii(sample, &mut buf),
            }
            written += 1;
        }
        if realtime {
            let due = started + Duration::from_secs_f64(t);
            if let Some(wait) = due.checked_duration_since(Instant::now()) {
                std::thread::sleep(wait);
            }
        }
        out.write_all(&buf)?;
        if realtime {
            out.flush()?;
        }
    }
    Ok(())
}
