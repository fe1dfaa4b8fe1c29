//! `dbtrail calibrate`: the guided bench procedure, from applied levels to a saved profile.
//! On a terminal it runs as a screen; otherwise as plain line prompts, so it can be
//! scripted. Both drive the same [`Desk`]; the line prompts print each step's words
//! followed by the points table when the step changed it.

use std::io::{self, BufRead, IsTerminal, Write};
use std::path::PathBuf;
use std::time::Duration;

use anyhow::{anyhow, Context};
use dbtrail::decode::Format;
use dbtrail::detector::ModelKind;
use dbtrail::procedure::{adc_settings, base_profile, Session, SettleRule};
use dbtrail::profile::load_profile;
use dbtrail::profile::raw::RawAdc;
use dbtrail::sim::{BenchDetector, SignalBench};
use dbtrail::stats::Averaging;

use super::{parse_frequency_arg, parse_ohms, BadInput, Failure, Runtime};
use crate::desk::bench::{Bench, BoardSensor, Measuring, Worker};
use crate::desk::{points_path, text, Desk, Outcome, Output, Said, Step};
use crate::source::{open_port, SerialSpec};

#[derive(clap::Args)]
pub struct Args {
    /// Serial port of the detector board
    #[arg(long, conflicts_with = "demo", required_unless_present = "demo")]
    port: Option<String>,
    /// Baud rate for --port
    #[arg(long, default_value_t = 115_200, allow_hyphen_values = true)]
    baud: u32,
    /// Calibrate a simulated bench instead: a diode or a logamp detector whose curve you do not know
    #[arg(long, num_args = 0..=1, default_missing_value = "diode", value_parser = ["diode", "logamp"])]
    demo: Option<String>,
    /// Where to write the profile (a points CSV is written beside it)
    #[arg(long)]
    out: PathBuf,
    /// Detector model to save: table, diode or log
    #[arg(long, default_value = "table", value_parser = ["table", "diode", "log"])]
    model: String,
    /// ADC resolution in bits
    #[arg(long, conflicts_with = "base", allow_hyphen_values = true)]
    adc_bits: Option<i64>,
    /// ADC reference voltage, volts
    #[arg(long, conflicts_with = "base", allow_hyphen_values = true, value_parser = super::parse_number_arg)]
    vref: Option<f64>,
    /// Divider ratio: detector volts / ADC pin volts
    #[arg(long, conflicts_with = "base", allow_hyphen_values = true, value_parser = super::parse_number_arg)]
    divider: Option<f64>,
    /// Take the ADC, impedance, offset and limits from this profile
    #[arg(long)]
    base: Option<PathBuf>,
    /// Reference impedance in ohms
    #[arg(long, default_value_t = 50.0, allow_hyphen_values = true, value_parser = parse_ohms)]
    ohms: f64,
    /// Frequency the levels are applied at (the curve's reference frequency)
    #[arg(long, default_value = "10MHz", allow_hyphen_values = true, value_parser = parse_frequency_arg)]
    freq: f64,
    /// Averaging of each settled level: a count of samples (1000) or a time (2s)
    #[arg(long, default_value = "1000", allow_hyphen_values = true, value_parser = parse_average)]
    average: Averaging,
    /// Give up on a level that has not settled after this long
    #[arg(long, default_value = "10s", allow_hyphen_values = true, value_parser = super::parse_duration_arg)]
    settle_timeout: Duration,
    /// Replace existing output files
    #[arg(long)]
    force: bool,
    /// Seed of the simulated bench's noise
    #[arg(long, default_value_t = 1, allow_hyphen_values = true)]
    seed: u64,
}

/// The screen's averaging rule, with nothing to average refused: a point is the mean of
/// at least one sample.
fn parse_average(text: &str) -> Result<Averaging, String> {
    match Averaging::parse(text) {
        Ok(Averaging::Off) if text.trim() != "1" => {
            Err("average over at least one sample, or more than 0 s".into())
        }
        Ok(averaging) => Ok(averaging),
        Err(e) => Err(format!("{e}; or a count of samples such as 1000")),
    }
}

pub fn run(args: Args) -> Result<(), Failure> {
    let (mut desk, bench) = set_up(&args)?;
    let worker = Worker::start(bench, desk.measuring);
    if io::stdin().is_terminal() && io::stdout().is_terminal() {
        let ending = crate::tui::calibrate::run(desk, &worker).runtime()?;
        if let Some(ending) = ending {
            // A closed standard output loses the closing line, not the saved profile.
            let _ = super::emit(&format!("{}\n", text::ending(&ending)));
        }
        return Ok(());
    }
    lines(&mut desk, &worker)
}

/// Refuses an existing --out (or its points CSV) before any measuring, unless --force.
fn check_out(args: &Args) -> Result<(), Failure> {
    if args.force {
        return Ok(());
    }
    for path in [args.out.clone(), points_path(&args.out)] {
        if path.exists() {
            return Err(anyhow!(
                "{} already exists; choose another --out, or add --force (checked before \
                 measuring, so that no work is lost at `save`)",
                path.display()
            ))
            .bad_input();
        }
    }
    Ok(())
}

fn set_up(args: &Args) -> Result<(Desk, Bench), Failure> {
    check_out(args)?;
    let demo = args.demo.as_deref().map(|d| {
        if d == "logamp" {
            BenchDetector::LogAmp
        } else {
            BenchDetector::Diode
        }
    });
    let model = ModelKind::from_name(&args.model).unwrap_or(ModelKind::Table);
    let loaded_base = match &args.base {
        Some(path) => Some(load_profile(path).bad_input()?),
        None => None,
    };
    // The board's sensor, when the base profile names its channel.
    let sensor = loaded_base.as_ref().and_then(|base| {
        base.temperature
            .map(|channel| BoardSensor::new(channel, base.adc.clone()))
    });
    let (bench, demo_adc, source) = match demo {
        Some(kind) => {
            let bench = SignalBench::new(kind, 1000.0, args.seed);
            let adc = bench.adc().clone();
            (
                Bench::Demo(bench),
                Some(adc),
                format!(
                    "the simulated {} bench",
                    args.demo.as_deref().unwrap_or("diode")
                ),
            )
        }
        None => {
            let path = args.port.clone().unwrap_or_default();
            let port = open_port(&path, args.baud).bad_input()?;
            let spec = SerialSpec {
                path: path.clone(),
                baud: args.baud,
                format: Format::Auto,
            };
            (
                Bench::Port(spec.start(port), sensor),
                None,
                format!("serial port {path}"),
            )
        }
    };
    let mut base = match loaded_base {
        Some(loaded) => loaded.raw,
        None => {
            let bits = args
                .adc_bits
                .or(demo_adc.as_ref().map(|a| i64::from(a.bits())));
            let vref = args.vref.or(demo_adc.as_ref().map(|a| a.vref()));
            let (Some(bits), Some(vref)) = (bits, vref) else {
                return Err(anyhow!(
                    "give the ADC with --adc-bits and --vref (and --divider), or --base PROFILE"
                ))
                .bad_input();
            };
            let divider = args.divider.or(demo_adc.as_ref().map(|a| a.divider()));
            let adc = RawAdc {
                divider,
                ..adc_settings(bits, vref)
            };
            let name = args
                .out
                .file_stem()
                .map_or("detector".into(), |s| s.to_string_lossy().into_owned());
            base_profile(&name, adc, args.ohms, args.freq)
        }
    };
    base.reference_frequency = dbtrail::profile::raw::FreqValue::Hz(args.freq);
    base.frequency_correction = None;
    let rule = SettleRule {
        timeout_s: args.settle_timeout.as_secs_f64(),
        ..SettleRule::default()
    };
    let measuring = Measuring {
        rule,
        averaging: args.average,
    };
    let session = Session::new(base, model);
    let output = Output {
        out: args.out.clone(),
        force: args.force,
        sync: crate::logs::sync,
    };
    let desk = Desk::new(session, output, measuring, source);
    Ok((desk, bench))
}

/// Plain line prompts, for scripts and pipes.
fn lines(desk: &mut Desk, worker: &Worker) -> Result<(), Failure> {
    let mut out = io::stdout().lock();
    let say = |out: &mut io::StdoutLock, text: &str| -> Result<(), Failure> {
        out.write_all(text.as_bytes())
            .and_then(|()| out.flush())
            .context("cannot write to standard output")
            .runtime()
    };
    say(
        &mut out,
        &format!(
            "dbtrail calibrate: {}\n{}\n{}",
            desk.source,
            text::HELP,
            text::prompt(desk)
        ),
    )?;
    for line in io::stdin().lock().lines() {
        let line = line.context("cannot read standard input").runtime()?;
        say(&mut out, &format!("{}\n", line.trim()))?;
        match take_line(desk, worker, &line)? {
            Outcome::Continue(said) => say(
                &mut out,
                &format!("{}\n{}", step_text(desk, &said), text::prompt(desk)),
            )?,
            Outcome::End(ending) => return say(&mut out, &format!("{}\n", text::ending(&ending))),
        }
    }
    end_of_input(desk, &mut out, say)
}

/// One line of input, measured on `worker` when it asks for that.
fn take_line(desk: &mut Desk, worker: &Worker, line: &str) -> Result<Outcome, Failure> {
    match desk.plan(line) {
        Step::Done(outcome) => Ok(outcome),
        Step::Measure(request) => {
            let result = worker.measure(request.applied).map_err(|_| {
                Failure::Runtime(anyhow!(
                    "the measuring thread has stopped, so no more levels can be measured"
                ))
            })?;
            Ok(desk.finish(request, result))
        }
    }
}

/// A step's words, followed by the points table when the step changed it.
fn step_text(desk: &Desk, said: &Said) -> String {
    let words = text::message(desk, said);
    if !text::shows_table(said) {
        return words;
    }
    let table = text::table(desk);
    if words.is_empty() {
        table
    } else {
        format!("{words}\n{table}")
    }
}

/// The input ended before `save`: keeps the points measured, if any.
fn end_of_input(
    desk: &Desk,
    out: &mut io::StdoutLock,
    say: impl Fn(&mut io::StdoutLock, &str) -> Result<(), Failure>,
) -> Result<(), Failure> {
    if desk.session.points.is_empty() {
        return say(out, "\nend of input; nothing measured, nothing written\n");
    }
    let n = desk.session.points.len();
    match desk.keep_points() {
        Ok(path) => Err(Failure::Runtime(anyhow!(
            "end of input before `save`: the profile was not written; {}",
            text::kept(n, &path)
        ))),
        Err(e) => {
            super::say_err!(
                "dbtrail: the points measured were:\n{}",
                desk.session.points_csv()
            );
            Err(Failure::Runtime(e.context(
                "end of input before `save`, and the points could not be kept (they are printed above)",
            )))
        }
    }
}
