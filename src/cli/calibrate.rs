//! `dbtrail calibrate`: the guided bench procedure, from applied levels to a saved profile.
//! On a terminal it runs as a screen; otherwise as plain line prompts, so it can be
//! scripted. Both drive the same [`Desk`].

use std::fmt::Write as _;
use std::io::{self, BufRead, IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering::Relaxed};
use std::time::{Duration, Instant};

use anyhow::{anyhow, Context};
use dbtrail::decode::Format;
use dbtrail::detector::{rms, table::leave_one_out_db, ModelKind};
use dbtrail::events::Event;
use dbtrail::procedure::{
    base_profile, measure_watched, MeasureError, Measured, Progress, Session, SettleRule,
};
use dbtrail::profile::load_profile;
use dbtrail::profile::raw::{RawAdc, RawLimits};
use dbtrail::sim::{BenchDetector, SignalBench};
use dbtrail::stats::Averaging;
use dbtrail::units::{parse_frequency, parse_level, Si};

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

/// Where the samples come from.
pub enum Bench {
    /// A simulated generator and detector, in simulated time.
    Demo(SignalBench),
    /// A real board; the user sets the generator by hand.
    Port(Running),
}

impl Bench {
    /// Samples after the generator is set to `applied` (dBm, Hz; `None`: RF off), until
    /// `limit` of time or until `cancel` is set.
    fn samples<'a>(
        &'a mut self,
        applied: Option<(f64, f64)>,
        limit: Duration,
        cancel: &'a AtomicBool,
    ) -> Box<dyn Iterator<Item = (f64, f64)> + 'a> {
        match self {
            Bench::Demo(bench) => {
                bench.apply(applied);
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
                    // A silent port must not hold a cancelled measurement until the deadline.
                    if Instant::now() > deadline || source.exhausted() || cancel.load(Relaxed) {
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

    /// Measures one level under `how`, telling `watch` the progress; stops with
    /// [`MeasureError::Cancelled`] as soon as `cancel` is set.
    pub fn measure(
        &mut self,
        applied: Option<(f64, f64)>,
        how: &Measuring,
        cancel: &AtomicBool,
        mut watch: impl FnMut(&Progress),
    ) -> Result<Measured, MeasureError> {
        self.discard_backlog();
        let limit = Duration::from_secs_f64(how.rule.timeout_s + 60.0);
        let result = measure_watched(
            self.samples(applied, limit, cancel),
            &how.rule,
            how.averaging,
            |p| {
                watch(p);
                !cancel.load(Relaxed)
            },
        );
        if cancel.load(Relaxed) {
            return Err(MeasureError::Cancelled);
        }
        result
    }
}

/// How each level is measured: the settle rule and the averaging.
#[derive(Debug, Clone, Copy)]
pub struct Measuring {
    /// When a level counts as settled.
    pub rule: SettleRule,
    /// How long a settled level is averaged.
    pub averaging: Averaging,
}

/// Which entries the prompt takes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    /// The first step: the ADC zero with RF off, or `skip`.
    Zero,
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
    /// Leave without saving the profile; show this (it says where the points went).
    Quit(String),
}

/// What a line of input asks for.
pub enum Step {
    /// Done at once.
    Done(Outcome),
    /// A measurement first; give its result to [`Desk::finish`].
    Measure(Request),
}

/// A measurement a line asked for, and what to do with its result.
pub struct Request {
    /// What the generator is set to (dBm, Hz), or `None` for RF off.
    pub applied: Option<(f64, f64)>,
    /// The line that asked, for showing while it runs.
    pub line: String,
    then: Then,
}

enum Then {
    Zero,
    Level(String),
    Redo(usize),
    Frequency(f64),
}

/// The session driven one line of input at a time; measurements go to a [`Bench`].
pub struct Desk {
    /// The calibration in progress.
    pub session: Session,
    /// Which entries the prompt takes.
    pub stage: Stage,
    out: PathBuf,
    force: bool,
    /// How each level is measured.
    pub measuring: Measuring,
    reference_hz: f64,
    /// What the samples come from.
    pub source: String,
    /// The last line was a `quit` that warned of unsaved points.
    quit_warned: bool,
}

impl Desk {
    /// A desk that will write `out` (and its points CSV beside it).
    pub fn new(
        session: Session,
        out: PathBuf,
        force: bool,
        measuring: Measuring,
        source: String,
    ) -> Self {
        let reference_hz = session.base.reference_frequency.hz().unwrap_or(10e6);
        Desk {
            session,
            stage: Stage::Zero,
            out,
            force,
            measuring,
            reference_hz,
            source,
            quit_warned: false,
        }
    }

    /// The prompt for the next line.
    pub fn prompt(&self) -> String {
        match (self.stage, &self.session.freq_level) {
            (Stage::Zero, _) => ZERO_PROMPT.into(),
            (Stage::Frequencies, Some((level, _))) => format!("frequency at {level}> "),
            _ => "level> ".into(),
        }
    }

    /// Takes one line of input, measuring on `bench` when it asks for that.
    pub fn handle(&mut self, bench: &mut Bench, line: &str) -> Outcome {
        match self.plan(line) {
            Step::Done(outcome) => outcome,
            Step::Measure(request) => {
                let result = bench.measure(
                    request.applied,
                    &self.measuring,
                    &AtomicBool::new(false),
                    |_| {},
                );
                self.finish(request, result)
            }
        }
    }

    /// What one line of input asks for: done at once, or a measurement first.
    pub fn plan(&mut self, line: &str) -> Step {
        let line = line.trim();
        let quit_warned = std::mem::take(&mut self.quit_warned);
        let mut words = line.split_whitespace();
        let first = words.next().unwrap_or("");
        let rest: Vec<&str> = words.collect();
        let result = match (first, rest.as_slice()) {
            ("", _) => Ok(String::new()),
            ("help" | "?", _) => Ok(HELP.to_string()),
            ("save", []) => return Step::Done(self.save(None)),
            ("save", [file]) => return Step::Done(self.save(Some(Path::new(file)))),
            ("quit" | "exit", _) => return Step::Done(self.quit(quit_warned)),
            ("list", _) => Ok(self.report()),
            ("zero", []) => return self.ask(None, line, Then::Zero),
            ("skip", []) if self.stage == Stage::Zero => {
                self.stage = Stage::Levels;
                Ok(format!(
                    "zero skipped: zero_counts stays {}\n{LIMITS_HINT}",
                    self.zero_counts()
                ))
            }
            ("limit", [which, level]) => self.set_limit(which, level),
            ("delete" | "del", [n]) => self.delete(n),
            ("redo", [n]) => return self.redo(n, line),
            ("model", [name]) => self.set_model(name),
            ("freq", [level]) => self.start_frequencies(level),
            ("levels", []) => {
                self.stage = Stage::Levels;
                Ok("back to levels at the reference frequency".into())
            }
            _ => return self.entry(line),
        };
        Step::Done(Outcome::Continue(continuing(result)))
    }

    fn ask(&self, applied: Option<(f64, f64)>, line: &str, then: Then) -> Step {
        Step::Measure(Request {
            applied,
            line: line.to_string(),
            then,
        })
    }

    /// Takes the result of the measurement `request` asked for.
    pub fn finish(&mut self, request: Request, result: Result<Measured, MeasureError>) -> Outcome {
        let measured = match result {
            Ok(m) => m,
            Err(MeasureError::Cancelled) => {
                return Outcome::Continue(format!("{}: {}", request.line, MeasureError::Cancelled))
            }
            Err(e) => return Outcome::Continue(continuing(Err(e.into()))),
        };
        let result = match request.then {
            Then::Zero => Ok(self.set_zero(&measured)),
            Then::Level(text) => self.add_level(&text, measured),
            Then::Redo(number) => self.replace(number, measured),
            Then::Frequency(hz) => self.add_frequency(hz, measured),
        };
        Outcome::Continue(continuing(result))
    }

    fn zero_text(&self) -> String {
        match self.session.base.adc.zero_counts {
            Some(zero) => format!("zero {zero:.2} counts"),
            None => "zero not measured (0 counts taken)".into(),
        }
    }

    fn zero_counts(&self) -> f64 {
        self.session.base.adc.zero_counts.unwrap_or(0.0)
    }

    fn set_zero(&mut self, measured: &Measured) -> String {
        self.session.base.adc.zero_counts = Some(measured.counts);
        if self.stage == Stage::Zero {
            self.stage = Stage::Levels;
        }
        format!(
            "{}\nthe ADC zero is {:.2} counts with RF off; it is saved as zero_counts in [adc]\n{LIMITS_HINT}",
            describe(measured),
            measured.counts
        )
    }

    fn set_limit(&mut self, which: &str, level: &str) -> anyhow::Result<String> {
        let dbm = parse_level(level, false)
            .map_err(|e| anyhow!("{e}\n(give the limit as a power, e.g. 20dBm or 5W)"))?
            .power(self.session.ohms())
            .dbm();
        if !(-200.0..=100.0).contains(&dbm) {
            return Err(anyhow!(
                "`{level}` is {dbm:.1} dBm; a limit lies from -200 to +100 dBm"
            ));
        }
        let limits = self.session.base.limits.get_or_insert(NO_LIMITS);
        let name = match which {
            "detector" => {
                limits.detector_max_dbm = Some(dbm);
                "the detector's safe input (detector_max_dbm)"
            }
            "load" | "attenuator" => {
                limits.reference_max_dbm = Some(dbm);
                "the load's or attenuator's rating (reference_max_dbm)"
            }
            other => {
                return Err(anyhow!(
                    "`limit {other}`: say `limit detector LEVEL` or `limit load LEVEL`"
                ))
            }
        };
        Ok(format!(
            "{name}: {dbm:.2} dBm, saved in [limits]; readings above it are flagged (the limits \
             cannot protect the hardware)"
        ))
    }

    fn entry(&mut self, text: &str) -> Step {
        if self.stage == Stage::Zero {
            // A level typed at the zero prompt skips the zero (scripts start with levels).
            self.stage = Stage::Levels;
        }
        let applied = match self.stage {
            Stage::Levels | Stage::Zero => self
                .session
                .parse_level(text)
                .map(|(_, dbm)| ((dbm, self.reference_hz), Then::Level(text.to_string())))
                .map_err(|e| anyhow!("{e}\n(type `help` for the commands)")),
            Stage::Frequencies => parse_frequency(text)
                .map_err(|e| {
                    anyhow!("{e}\n(in the frequency stage enter a frequency; `levels` goes back)")
                })
                .and_then(|hz| {
                    let (_, dbm) = self
                        .session
                        .freq_level
                        .clone()
                        .context("no level for the frequency stage")?;
                    Ok(((dbm, hz), Then::Frequency(hz)))
                }),
        };
        match applied {
            Ok((applied, then)) => self.ask(Some(applied), text, then),
            Err(e) => Step::Done(Outcome::Continue(continuing(Err(e)))),
        }
    }

    /// Adds a level's point, or replaces the point already taken at that level.
    fn add_level(&mut self, text: &str, measured: Measured) -> anyhow::Result<String> {
        let (_, dbm) = self.session.parse_level(text)?;
        let ohms = self.session.ohms();
        let same = self
            .session
            .points
            .iter()
            .position(|p| (p.level.power(ohms).dbm() - dbm).abs() < 1e-6);
        if let Some(index) = same {
            return self.replace(index + 1, measured);
        }
        self.session.add(text, measured)?;
        Ok(format!("{}\n{}", describe(&measured), self.report()))
    }

    fn add_frequency(&mut self, hz: f64, measured: Measured) -> anyhow::Result<String> {
        let correction = self.session.add_frequency(hz, measured)?;
        Ok(format!(
            "{}\ncorrection at {}: {correction:+.3} dB (true minus indicated)\n{}",
            describe(&measured),
            Si::new(hz, "Hz"),
            self.frequency_report()
        ))
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

    fn redo(&mut self, n: &str, line: &str) -> Step {
        let point = Self::point_number(n).and_then(|number| {
            let point = self
                .session
                .points
                .get(number.wrapping_sub(1))
                .ok_or(dbtrail::procedure::SessionError::NoPoint(number))?;
            Ok((number, point.level.power(self.session.ohms()).dbm()))
        });
        match point {
            Ok((number, dbm)) => self.ask(Some((dbm, self.reference_hz)), line, Then::Redo(number)),
            Err(e) => Step::Done(Outcome::Continue(continuing(Err(e)))),
        }
    }

    /// Puts a new measurement in place of point `number`, saying what it replaced.
    fn replace(&mut self, number: usize, measured: Measured) -> anyhow::Result<String> {
        let was = self
            .session
            .points
            .get(number.wrapping_sub(1))
            .map(|p| (p.applied.clone(), p.measured.counts))
            .ok_or(dbtrail::procedure::SessionError::NoPoint(number))?;
        self.session.redo(number, measured)?;
        Ok(format!(
            "replaced point {number} (was {:.2} counts, now {:.2}) at {}\n{}",
            was.1,
            measured.counts,
            was.0,
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
        let _ = write!(out, "    RMS error{:>32}", "");
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
            "\n    (model minus applied, dB; table: the error with that point left out)"
        );
        let _ = writeln!(
            out,
            "    saving model: {} · {}\n    limits: {}",
            session.model,
            self.zero_text(),
            self.limits_text()
        );
        for warning in session.warnings() {
            let _ = writeln!(out, "  ! {warning}");
        }
        out
    }

    fn limits_text(&self) -> String {
        let limits = self.session.base.limits.clone().unwrap_or(NO_LIMITS);
        let show = |v: Option<f64>| v.map_or("not given".into(), |d| format!("{d:.1} dBm"));
        format!(
            "detector {}, load {}",
            show(limits.detector_max_dbm),
            show(limits.reference_max_dbm)
        )
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

    fn save(&mut self, file: Option<&Path>) -> Outcome {
        let target = file.unwrap_or(&self.out).to_path_buf();
        match self.write_files(&target) {
            Ok(text) => Outcome::Saved(text),
            Err(e) => {
                Outcome::Continue(format!("{e:#}\n(nothing was written; the session goes on)"))
            }
        }
    }

    fn write_files(&self, target: &Path) -> anyhow::Result<String> {
        let points = points_path(target);
        let header = format!(
            "Written by dbtrail calibrate from {}.\nLevels applied at the detector input at {}; the raw points are kept below and in {}.",
            self.source,
            Si::new(self.reference_hz, "Hz"),
            points.display()
        );
        let profile = self.session.profile_text(&header)?;
        for path in [target, points.as_path()] {
            if path.exists() && !self.force {
                return Err(anyhow!(
                    "{} already exists, and calibrate was started without --force; \
                     `save` another file name (e.g. `save {}`)",
                    path.display(),
                    free_name(&target.with_extension(""), "toml").display()
                ));
            }
        }
        write_new(target, &profile, self.force)?;
        write_new(&points, &self.session.points_csv(), self.force)?;
        Ok(format!(
            "wrote {} and {}",
            target.display(),
            points.display()
        ))
    }

    /// `quit`: with unsaved points, the first warns and the second leaves, keeping them.
    fn quit(&mut self, warned: bool) -> Outcome {
        let n = self.session.points.len();
        if n == 0 {
            return Outcome::Quit("left; nothing was measured, nothing written".into());
        }
        if !warned {
            self.quit_warned = true;
            return Outcome::Continue(format!(
                "{} not saved: `save` writes them, `quit` again leaves and keeps them in {}",
                counted_points(n),
                self.kept_points_path().display()
            ));
        }
        match self.keep_points() {
            Ok(path) => Outcome::Quit(format!(
                "left without saving the profile; {} kept in {} \
                 (`dbtrail fit {}` makes a profile of them)",
                counted_points(n),
                path.display(),
                path.display()
            )),
            Err(e) => Outcome::Continue(continuing(Err(e))),
        }
    }

    /// Where [`Desk::keep_points`] would write now.
    fn kept_points_path(&self) -> PathBuf {
        free_name(&self.out.with_extension("points"), "csv")
    }

    /// Writes the points CSV beside the intended profile, under a free name: an
    /// existing file is never replaced. Returns the path written.
    pub fn keep_points(&self) -> anyhow::Result<PathBuf> {
        let path = self.kept_points_path();
        let mut file = std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
            .with_context(|| format!("cannot create {} to keep the points", path.display()))?;
        file.write_all(self.session.points_csv().as_bytes())
            .and_then(|()| super::files::sync(&file))
            .with_context(|| format!("cannot write {}", path.display()))?;
        Ok(path)
    }
}

/// `1 point`, `3 points`.
fn counted_points(n: usize) -> String {
    if n == 1 {
        "1 point".into()
    } else {
        format!("{n} points")
    }
}

/// A `[limits]` table with neither limit given.
const NO_LIMITS: RawLimits = RawLimits {
    detector_max_dbm: None,
    reference_max_dbm: None,
};

/// A line's result as shown: errors say that nothing changed.
fn continuing(result: anyhow::Result<String>) -> String {
    result.unwrap_or_else(|e| format!("{e:#}\n(nothing was changed; the session goes on)"))
}

/// `stem.ext` if free, else `stem-1.ext`, `stem-2.ext` … (`p.points` → `p.points-1.csv`).
fn free_name(stem: &Path, ext: &str) -> PathBuf {
    let plain = PathBuf::from(format!("{}.{ext}", stem.display()));
    if !plain.exists() {
        return plain;
    }
    (1..)
        .map(|i| PathBuf::from(format!("{}-{i}.{ext}", stem.display())))
        .find(|p| !p.exists())
        .unwrap_or(plain)
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

/// The commands, each line short enough for an 80-column terminal.
pub const HELP: &str = "\
Enter the level you have applied (e.g. -10dBm, 3.16mW, 0.5Vpk, 1.25Vdc):
dbtrail waits for the reading to settle, averages it and adds the point;
the same level again replaces its point. Commands:
  zero            measure the ADC zero with RF off (first; `skip` goes on)
  limit detector LEVEL   the detector's safe input (e.g. 20dBm)
  limit load LEVEL       the load's or attenuator's rating (e.g. 5W)
  redo N   measure point N again       delete N   remove point N
  model NAME   save the table, diode or log model    list   show the fits
  freq LEVEL   frequency stage at LEVEL, then each frequency (e.g. 146MHz)
  levels       back to the level stage
  save [FILE]  write the profile and its points CSV      quit   leave
Safety: stay within the detector's, the load's and the attenuator's ratings;
RF burns; transmit only as your licence and local regulations allow.";

/// The prompt of the first step.
const ZERO_PROMPT: &str = "zero: RF off + `zero`, or `skip`, or a level> ";

/// What follows the zero step.
const LIMITS_HINT: &str = "\
if you know them, give the limits (each optional): `limit detector 20dBm` for
the detector's safe input, `limit load 5W` for the load's or attenuator's rating;
then apply the first level and enter it";

pub fn run(args: Args) -> Result<(), Failure> {
    let (mut desk, mut bench) = set_up(&args)?;
    if io::stdin().is_terminal() && io::stdout().is_terminal() {
        return crate::tui::calibrate::run(desk, bench).runtime();
    }
    lines(&mut desk, &mut bench)
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
    let measuring = Measuring {
        rule,
        averaging: args.average,
    };
    let session = Session::new(base, model);
    let desk = Desk::new(session, args.out.clone(), args.force, measuring, source);
    Ok((desk, bench))
}

/// Plain line prompts, for scripts and pipes.
fn lines(desk: &mut Desk, bench: &mut Bench) -> Result<(), Failure> {
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
        match desk.handle(bench, &line) {
            Outcome::Continue(text) => say(&mut out, &format!("{text}\n{}", desk.prompt()))?,
            Outcome::Saved(text) | Outcome::Quit(text) => {
                return say(&mut out, &format!("{text}\n"))
            }
        }
    }
    if desk.session.points.is_empty() {
        return say(
            &mut out,
            "\nend of input; nothing measured, nothing written\n",
        );
    }
    let n = desk.session.points.len();
    match desk.keep_points() {
        Ok(path) => Err(Failure::Runtime(anyhow!(
            "end of input before `save`: the profile was not written; {} kept in {} \
             (`dbtrail fit {}` makes a profile of them)",
            counted_points(n),
            path.display(),
            path.display()
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

#[cfg(test)]
mod tests {
    use super::*;

    // Source: issue 16's decision: kept points never overwrite an existing file; the
    // next free name is p.points-1.csv, then p.points-2.csv.
    #[test]
    fn kept_points_take_the_next_free_name() {
        let dir = std::env::temp_dir().join(format!("dbtrail-free-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let stem = dir.join("p.points");
        assert_eq!(free_name(&stem, "csv"), dir.join("p.points.csv"));
        std::fs::write(dir.join("p.points.csv"), "x").unwrap();
        assert_eq!(free_name(&stem, "csv"), dir.join("p.points-1.csv"));
        std::fs::write(dir.join("p.points-1.csv"), "x").unwrap();
        assert_eq!(free_name(&stem, "csv"), dir.join("p.points-2.csv"));
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
