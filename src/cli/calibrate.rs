//! `dbtrail calibrate`: the guided bench procedure, from applied levels to a saved profile.
//! On a terminal it runs as a screen; otherwise as plain line prompts, so it can be
//! scripted. Both drive the same [`Desk`].

use std::fmt::Write as _;
use std::io::{self, BufRead, IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use anyhow::{anyhow, Context};
use dbtrail::capture::{base_profile, measure, Measured, Session, SettleRule, Span};
use dbtrail::decode::Format;
use dbtrail::detector::{rms, table::leave_one_out_db, ModelKind};
use dbtrail::profile::load_profile;
use dbtrail::profile::raw::RawAdc;
use dbtrail::record::Event;
use dbtrail::sim::{BenchDetector, SignalBench};
use dbtrail::units::{parse_duration, parse_frequency, Si};

use super::{parse_frequency_arg, parse_ohms, BadInput, Failure, Runtime};
use crate::source::{open_port, Running, SerialSpec};

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
    #[arg(long, default_value = "1000", allow_hyphen_values = true, value_parser = parse_span)]
    average: Span,
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

fn parse_span(text: &str) -> Result<Span, String> {
    if let Ok(n) = text.trim().parse::<u64>() {
        return if n > 0 {
            Ok(Span::Samples(n))
        } else {
            Err("average over at least one sample".into())
        };
    }
    match parse_duration(text) {
        Ok(d) if !d.is_zero() => Ok(Span::Seconds(d.as_secs_f64())),
        Ok(_) => Err("average over more than 0 s".into()),
        Err(e) => Err(format!("{e}; or a count of samples such as 1000")),
    }
}

/// Where the samples come from.
pub enum Bench {
    /// A simulated generator and detector, in simulated time.
    Demo(SignalBench),
    /// A real board; the user sets the generator by hand.
    Port(Running),
}

impl Bench {
    /// Samples after the generator is set to `applied` (dBm, Hz), until `limit` of time.
    fn samples(
        &mut self,
        applied: (f64, f64),
        limit: Duration,
    ) -> Box<dyn Iterator<Item = (f64, f64)> + '_> {
        match self {
            Bench::Demo(bench) => {
                bench.apply(Some(applied));
                Box::new(std::iter::repeat_with(move || {
                    let (t, c) = bench.next_sample();
                    (t, f64::from(c))
                }))
            }
            Bench::Port(source) => {
                let deadline = Instant::now() + limit;
                let mut pending = std::collections::VecDeque::new();
                Box::new(std::iter::from_fn(move || loop {
                    if let Some(sample) = pending.pop_front() {
                        return Some(sample);
                    }
                    if let Some(Event::Samples(chunk)) = source.next_event() {
                        pending.extend(
                            (0..chunk.len())
                                .map(|i| (chunk.time(i), f64::from(chunk.counts(i)[0]))),
                        );
                        continue;
                    }
                    if Instant::now() > deadline || source.exhausted() {
                        return None;
                    }
                    std::thread::sleep(Duration::from_millis(1));
                }))
            }
        }
    }

    /// Drops samples that arrived while the user was typing.
    fn discard_backlog(&mut self) {
        if let Bench::Port(source) = self {
            while source.next_event().is_some() {}
        }
    }
}

/// Which entries the prompt takes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    /// Levels at the reference frequency.
    Levels,
    /// Frequencies at one level.
    Frequencies,
}

/// What a line of input led to.
pub enum Outcome {
    /// Go on; show this.
    Continue(String),
    /// Saved; show this and end.
    Saved(String),
    /// Leave without saving.
    Quit,
}

/// The session and the bench, driven one line of input at a time.
pub struct Desk {
    /// The calibration in progress.
    pub session: Session,
    /// Where samples come from.
    pub bench: Bench,
    /// Which entries the prompt takes.
    pub stage: Stage,
    out: PathBuf,
    force: bool,
    rule: SettleRule,
    span: Span,
    reference_hz: f64,
    /// What the samples come from.
    pub source: String,
}

impl Desk {
    /// The prompt for the next line.
    pub fn prompt(&self) -> String {
        match (self.stage, &self.session.freq_level) {
            (Stage::Frequencies, Some((level, _))) => format!("frequency at {level}> "),
            _ => "level> ".into(),
        }
    }

    /// Takes one line of input.
    pub fn handle(&mut self, line: &str) -> Outcome {
        let line = line.trim();
        let mut words = line.split_whitespace();
        let first = words.next().unwrap_or("");
        let rest: Vec<&str> = words.collect();
        let result = match (first, rest.as_slice()) {
            ("", _) => Ok(String::new()),
            ("help" | "?", _) => Ok(HELP.to_string()),
            ("save", _) => return self.save(),
            ("quit" | "exit", _) => return Outcome::Quit,
            ("list", _) => Ok(self.report()),
            ("delete" | "del", [n]) => self.delete(n),
            ("redo", [n]) => self.redo(n),
            ("model", [name]) => self.set_model(name),
            ("freq", [level]) => self.start_frequencies(level),
            ("levels", []) => {
                self.stage = Stage::Levels;
                Ok("back to levels at the reference frequency".into())
            }
            _ => self.entry(line),
        };
        Outcome::Continue(
            result.unwrap_or_else(|e| format!("{e}\n(nothing was changed; the session goes on)")),
        )
    }

    fn entry(&mut self, text: &str) -> anyhow::Result<String> {
        match self.stage {
            Stage::Levels => {
                let (_, dbm) = self
                    .session
                    .parse_level(text)
                    .map_err(|e| anyhow!("{e}\n(type `help` for the commands)"))?;
                let measured = self.measure((dbm, self.reference_hz))?;
                self.session.add(text, measured)?;
                Ok(format!("{}\n{}", describe(&measured), self.report()))
            }
            Stage::Frequencies => {
                let hz = parse_frequency(text).map_err(|e| {
                    anyhow!("{e}\n(in the frequency stage enter a frequency; `levels` goes back)")
                })?;
                let (_, dbm) = self
                    .session
                    .freq_level
                    .clone()
                    .context("no level for the frequency stage")?;
                let measured = self.measure((dbm, hz))?;
                let correction = self.session.add_frequency(hz, measured)?;
                Ok(format!(
                    "{}\ncorrection at {}: {correction:+.3} dB (true minus indicated)\n{}",
                    describe(&measured),
                    Si::new(hz, "Hz"),
                    self.frequency_report()
                ))
            }
        }
    }

    fn measure(&mut self, applied: (f64, f64)) -> anyhow::Result<Measured> {
        self.bench.discard_backlog();
        let limit = Duration::from_secs_f64(self.rule.timeout_s + 60.0);
        Ok(measure(
            self.bench.samples(applied, limit),
            &self.rule,
            self.span,
        )?)
    }

    fn point_number(text: &str) -> anyhow::Result<usize> {
        text.parse()
            .map_err(|_| anyhow!("`{text}` is not a point number; the points are numbered from 1"))
    }

    fn delete(&mut self, n: &str) -> anyhow::Result<String> {
        let removed = self.session.delete(Self::point_number(n)?)?;
        Ok(format!(
            "deleted point {n} ({})\n{}",
            removed.applied,
            self.report()
        ))
    }

    fn redo(&mut self, n: &str) -> anyhow::Result<String> {
        let number = Self::point_number(n)?;
        let point = self
            .session
            .points
            .get(number.wrapping_sub(1))
            .cloned()
            .ok_or(dbtrail::capture::SessionError::NoPoint(number))?;
        let dbm = point.level.power(self.session.ohms()).dbm();
        let measured = self.measure((dbm, self.reference_hz))?;
        self.session.redo(number, measured)?;
        Ok(format!(
            "redid point {number} ({}): {}\n{}",
            point.applied,
            describe(&measured),
            self.report()
        ))
    }

    fn set_model(&mut self, name: &str) -> anyhow::Result<String> {
        self.session.model = ModelKind::from_name(name)
            .ok_or_else(|| anyhow!("unknown model `{name}`; choose table, diode or log"))?;
        Ok(format!("the {name} model will be saved\n{}", self.report()))
    }

    fn start_frequencies(&mut self, level: &str) -> anyhow::Result<String> {
        self.session.start_frequency_stage(level)?;
        self.stage = Stage::Frequencies;
        Ok(format!(
            "frequency stage: keep the generator at {level} and enter each frequency you set it to \
             (e.g. 146MHz); `levels` goes back, `save` writes the profile"
        ))
    }

    /// The points with each model's fit, the RMS errors and the warnings.
    pub fn report(&self) -> String {
        let session = &self.session;
        let cal_points = session.cal_points();
        let fits: Vec<(ModelKind, Option<Vec<f64>>)> =
            [ModelKind::Table, ModelKind::Log, ModelKind::Diode]
                .into_iter()
                .map(|kind| {
                    let errors = match kind {
                        ModelKind::Table => Some(
                            leave_one_out_db(&cal_points, dbtrail::detector::Axis::LogVolts)
                                .iter()
                                .map(|e| e.unwrap_or(f64::NAN))
                                .collect(),
                        ),
                        _ => session.fitted(kind).ok().map(|p| p.residuals_db()),
                    };
                    (
                        kind,
                        errors.filter(|_| session.points.len() >= kind.min_points()),
                    )
                })
                .collect();
        let mut out = String::from(" #  applied          counts      ±std       n");
        for (kind, _) in &fits {
            let _ = write!(out, "  {:>9}", format!("{} dB", kind.name()));
        }
        out.push('\n');
        for (i, p) in session.points.iter().enumerate() {
            let m = &p.measured;
            let _ = write!(
                out,
                "{:>2}  {:<12} {:>10.2} {:>9.2} {:>7}",
                i + 1,
                p.applied,
                m.counts,
                m.std_counts,
                m.samples
            );
            for (_, errors) in &fits {
                let cell = errors
                    .as_ref()
                    .and_then(|e| e.get(i))
                    .filter(|e| e.is_finite());
                let _ = write!(
                    out,
                    "  {:>9}",
                    cell.map_or("·".to_string(), |e| format!("{e:+.3}"))
                );
            }
            out.push('\n');
        }
        let _ = write!(out, "    RMS error{:>38}", "");
        for (_, errors) in &fits {
            let finite: Vec<f64> = errors
                .iter()
                .flatten()
                .copied()
                .filter(|e| e.is_finite())
                .collect();
            let _ = write!(
                out,
                "  {:>9}",
                if finite.is_empty() {
                    "·".into()
                } else {
                    format!("{:.3}", rms(&finite))
                }
            );
        }
        let _ = writeln!(
            out,
            "\n    (model minus applied, dB; for the table, the error when that point is left out)"
        );
        let _ = writeln!(out, "    saving model: {}", session.model);
        for warning in session.warnings() {
            let _ = writeln!(out, "  ! {warning}");
        }
        out
    }

    fn frequency_report(&self) -> String {
        let mut out = String::from("  frequency      counts   correction dB\n");
        for e in &self.session.freq_entries {
            let c = self
                .session
                .correction_at(e.hz)
                .map_or("·".into(), |c| format!("{c:+.3}"));
            let _ = writeln!(
                out,
                "  {:<12} {:>9.2} {:>12}",
                Si::new(e.hz, "Hz").to_string(),
                e.measured.counts,
                c
            );
        }
        out
    }

    fn save(&mut self) -> Outcome {
        match self.write_files() {
            Ok(text) => Outcome::Saved(text),
            Err(e) => {
                Outcome::Continue(format!("{e:#}\n(nothing was written; the session goes on)"))
            }
        }
    }

    fn write_files(&self) -> anyhow::Result<String> {
        let header = format!(
            "Written by dbtrail calibrate from {}.\nLevels applied at the detector input at {}; the raw points are kept below and in {}.",
            self.source,
            Si::new(self.reference_hz, "Hz"),
            points_path(&self.out).display()
        );
        let profile = self.session.profile_text(&header)?;
        let points = points_path(&self.out);
        write_new(&self.out, &profile, self.force)?;
        write_new(&points, &self.session.points_csv(), self.force)?;
        Ok(format!(
            "wrote {} and {}",
            self.out.display(),
            points.display()
        ))
    }
}

fn describe(m: &Measured) -> String {
    format!(
        "settled: {:.2} counts (±{:.2}, {} samples)",
        m.counts, m.std_counts, m.samples
    )
}

/// `p.toml` → `p.points.csv`.
fn points_path(out: &Path) -> PathBuf {
    out.with_extension("points.csv")
}

fn write_new(path: &Path, text: &str, force: bool) -> anyhow::Result<()> {
    if path.exists() && !force {
        return Err(anyhow!(
            "{} already exists; choose another --out or add --force",
            path.display()
        ));
    }
    let mut file =
        std::fs::File::create(path).with_context(|| format!("cannot create {}", path.display()))?;
    file.write_all(text.as_bytes())
        .and_then(|()| super::files::sync(&file))
        .with_context(|| format!("cannot write {}", path.display()))
}

pub const HELP: &str = "\
Enter the level you have applied (e.g. -10dBm, 3.16mW, 0.5Vpk, 1.25Vdc): dbtrail waits for
the reading to settle, averages it and adds the point. Commands:
  redo N         measure point N again          delete N     remove point N
  model NAME     save the table, diode or log model
  freq LEVEL     frequency stage at LEVEL: then enter each frequency (e.g. 146MHz)
  levels         back to the level stage        list         show the points and fits
  save           write the profile and its points CSV        quit   leave without saving
Safety: stay within the detector's, the load's and the attenuator's ratings; RF burns;
transmit only as your licence and local regulations allow.";

pub fn run(args: Args) -> Result<(), Failure> {
    let mut desk = set_up(&args)?;
    if io::stdin().is_terminal() && io::stdout().is_terminal() {
        return crate::tui::calibrate::run(desk).runtime();
    }
    lines(&mut desk)
}

fn set_up(args: &Args) -> Result<Desk, Failure> {
    let demo = args.demo.as_deref().map(|d| {
        if d == "logamp" {
            BenchDetector::LogAmp
        } else {
            BenchDetector::Diode
        }
    });
    let model = ModelKind::from_name(&args.model).unwrap_or(ModelKind::Table);
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
                Bench::Port(spec.start(port)),
                None,
                format!("serial port {path}"),
            )
        }
    };
    let mut base = match &args.base {
        Some(path) => load_profile(path).bad_input()?.raw,
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
                bits,
                vref,
                divider,
                zero_counts: None,
                clip_margin: None,
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
    Ok(Desk {
        session: Session::new(base, model),
        bench,
        stage: Stage::Levels,
        out: args.out.clone(),
        force: args.force,
        rule,
        span: args.average,
        reference_hz: args.freq,
        source,
    })
}

/// Plain line prompts, for scripts and pipes.
fn lines(desk: &mut Desk) -> Result<(), Failure> {
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
            "dbtrail calibrate: {}\n{HELP}\n{}",
            desk.source,
            desk.prompt()
        ),
    )?;
    for line in io::stdin().lock().lines() {
        let line = line.context("cannot read standard input").runtime()?;
        say(&mut out, &format!("{}\n", line.trim()))?;
        match desk.handle(&line) {
            Outcome::Continue(text) => say(&mut out, &format!("{text}\n{}", desk.prompt()))?,
            Outcome::Saved(text) => return say(&mut out, &format!("{text}\n")),
            Outcome::Quit => return say(&mut out, "left without saving\n"),
        }
    }
    if desk.session.points.is_empty() {
        return say(
            &mut out,
            "\nend of input; nothing measured, nothing written\n",
        );
    }
    super::say_err!(
        "\ndbtrail: input ended before `save`: nothing written. The points measured were:\n{}",
        desk.session.points_csv()
    );
    Err(Failure::Runtime(anyhow!(
        "end of input before `save` (the points are printed above)"
    )))
}
