//! The calibration session that both front ends of `dbtrail calibrate` drive, the line
//! prompts and the screen: one line of input at a time, through the steps (the zero, the
//! limits, levels, a level entered again, the frequency stage, saving the points). It
//! answers in data, what happened and with which values; each front end words it
//! ([`text`] holds the words they share). Measurements go to a [`bench::Worker`].

pub mod bench;
pub mod text;

use std::fs::File;
use std::io::{self, Write as _};
use std::path::{Path, PathBuf};

use anyhow::{anyhow, Context};
use dbtrail::detector::thermal::{temperature_groups, SET_GAP_K};
use dbtrail::detector::{rms, table::leave_one_out_db, Axis, CalPoint, ModelKind};
use dbtrail::procedure::{MeasureError, Measured, Session, SessionError, SessionPoint};
use dbtrail::profile::raw::RawLimits;
use dbtrail::thermal::PLAUSIBLE_C;
use dbtrail::units::{parse_frequency, parse_level, Si, UnitError};

use bench::{Applied, Measuring};

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
#[derive(Debug)]
pub enum Outcome {
    /// The session goes on, after this.
    Continue(Said),
    /// The session is over.
    End(Ending),
}

/// How a session ended.
#[derive(Debug, Clone, PartialEq)]
pub enum Ending {
    /// The profile and its points CSV were written.
    Saved {
        /// The profile.
        profile: PathBuf,
        /// Its points CSV.
        points: PathBuf,
    },
    /// Left with nothing measured, nothing written.
    LeftEmpty,
    /// Left without saving the profile; the points were kept.
    LeftKept {
        /// How many points.
        points: usize,
        /// The points CSV they were kept in.
        path: PathBuf,
    },
}

/// Which limit a `limit` line set.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Limit {
    /// The detector's safe input, `detector_max_dbm`.
    Detector,
    /// The load's or attenuator's rating, `reference_max_dbm`.
    Load,
}

/// What a line did, when the session goes on.
#[derive(Debug)]
pub enum Said {
    /// An empty line.
    Nothing,
    /// `help`.
    Help,
    /// `list`: the table, nothing else.
    Table,
    /// `skip` at the zero step.
    ZeroSkipped {
        /// The zero kept.
        zero_counts: f64,
    },
    /// The ADC zero was measured with RF off.
    Zero(Measured),
    /// `temp C`: the board temperature the following points are tagged with.
    BoardTemperature {
        /// °C.
        celsius: f64,
    },
    /// A limit was set.
    Limit {
        /// Which.
        limit: Limit,
        /// To what, dBm.
        dbm: f64,
    },
    /// A point was deleted.
    Deleted {
        /// Its number as entered.
        number: String,
        /// The point.
        removed: SessionPoint,
    },
    /// A level's point was added.
    Added(Measured),
    /// A point was measured again (`redo`, or its level entered again).
    Replaced {
        /// Its number, from 1.
        number: usize,
        /// The level as first entered.
        applied: String,
        /// The counts it had.
        was: f64,
        /// The counts it has now.
        now: f64,
    },
    /// `model NAME`.
    Model {
        /// The name as entered.
        name: String,
    },
    /// The frequency stage began.
    FrequencyStage {
        /// The level, as entered.
        level: String,
    },
    /// `levels`: back to the level stage.
    Levels,
    /// A frequency entry was measured.
    Frequency {
        /// What was measured.
        measured: Measured,
        /// At which frequency, Hz.
        hz: f64,
        /// Its correction, dB (true minus indicated).
        correction: f64,
    },
    /// A measurement was cancelled; `line` asked for it.
    Cancelled {
        /// The line.
        line: String,
    },
    /// The first `quit` with unsaved points: a warning.
    QuitWarned {
        /// How many points.
        points: usize,
        /// Where a second `quit` keeps them.
        path: PathBuf,
    },
    /// The line was refused; nothing changed.
    Refused(Refusal),
    /// `save` failed; nothing was written.
    NotSaved(anyhow::Error),
}

/// Why a line changed nothing.
#[derive(Debug)]
pub enum Refusal {
    /// A level that does not parse where a level was expected.
    Level(SessionError),
    /// A frequency that does not parse in the frequency stage.
    Frequency(UnitError),
    /// A limit that is not a power.
    LimitLevel(UnitError),
    /// A limit outside -200 to +100 dBm.
    LimitRange {
        /// As entered.
        level: String,
        /// In dBm.
        dbm: f64,
    },
    /// `limit` of something that has none.
    LimitWhich(String),
    /// Not a point number.
    PointNumber(String),
    /// No such model.
    Model(String),
    /// The frequency stage without its level.
    NoFrequencyLevel,
    /// The session refused.
    Session(SessionError),
    /// The measurement gave no point.
    Measure(MeasureError),
    /// The points could not be kept at `quit`.
    NotKept(anyhow::Error),
    /// A board temperature that is not a number of °C in the plausible range.
    Temperature(String),
    /// A board temperature typed after points taken without one.
    Untagged(Vec<usize>),
}

impl From<SessionError> for Refusal {
    fn from(e: SessionError) -> Self {
        Refusal::Session(e)
    }
}

/// What a line of input asks for.
pub enum Step {
    /// Done at once.
    Done(Outcome),
    /// A measurement first; give its result to [`Desk::finish`].
    Measure(Request),
}

/// A measurement a line asked for, and what to do with its result.
#[derive(Debug)]
pub struct Request {
    /// What the generator is set to.
    pub applied: Applied,
    /// The line that asked, for showing while it runs.
    pub line: String,
    then: Then,
}

#[derive(Debug)]
enum Then {
    Zero,
    Level(String),
    Redo(usize),
    Frequency(f64),
}

/// One model's errors at the points, for the table.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelFit {
    /// The model.
    pub kind: ModelKind,
    /// Model minus applied at each point, dB (NaN where there is none; for the table,
    /// with that point left out); `None` with too few points.
    pub errors: Option<Vec<f64>>,
    /// The RMS of the finite errors.
    pub rms: Option<f64>,
}

/// Where a desk writes, and how.
pub struct Output {
    /// The profile to write (its points CSV goes beside it).
    pub out: PathBuf,
    /// Existing files may be replaced.
    pub force: bool,
    /// Makes a written file durable, as the command's other writers do.
    pub sync: fn(&File) -> io::Result<()>,
}

/// The session driven one line of input at a time.
pub struct Desk {
    /// The calibration in progress.
    pub session: Session,
    /// Which entries the prompt takes.
    pub stage: Stage,
    output: Output,
    /// How each level is measured.
    pub measuring: Measuring,
    reference_hz: f64,
    /// What the samples come from.
    pub source: String,
    /// The last line was a `quit` that warned of unsaved points.
    quit_warned: bool,
    /// The board temperature typed for the following points, °C (`temp`), used when the
    /// stream carries no sensor.
    pub board_c: Option<f64>,
}

type Answer = Result<Said, Refusal>;

impl Desk {
    /// A desk that will write to `output`.
    pub fn new(session: Session, output: Output, measuring: Measuring, source: String) -> Self {
        let reference_hz = session.base.reference_frequency.hz().unwrap_or(10e6);
        Desk {
            session,
            stage: Stage::Zero,
            output,
            measuring,
            reference_hz,
            source,
            quit_warned: false,
            board_c: None,
        }
    }

    /// What one line of input asks for: done at once, or a measurement first.
    pub fn plan(&mut self, line: &str) -> Step {
        let line = line.trim();
        let quit_warned = std::mem::take(&mut self.quit_warned);
        let mut words = line.split_whitespace();
        let first = words.next().unwrap_or("");
        let rest: Vec<&str> = words.collect();
        let answer = match (first, rest.as_slice()) {
            ("", _) => Ok(Said::Nothing),
            ("help" | "?", _) => Ok(Said::Help),
            ("save", []) => return Step::Done(self.save(None)),
            ("save", [file]) => return Step::Done(self.save(Some(Path::new(file)))),
            ("quit" | "exit", _) => return Step::Done(self.quit(quit_warned)),
            ("list", _) => Ok(Said::Table),
            ("zero", []) => return self.ask(None, line, Then::Zero),
            ("skip", []) if self.stage == Stage::Zero => {
                self.stage = Stage::Levels;
                Ok(Said::ZeroSkipped {
                    zero_counts: self.session.base.adc.zero_counts.unwrap_or(0.0),
                })
            }
            ("limit", [which, level]) => self.set_limit(which, level),
            ("temp", [celsius]) => self.set_board_temperature(celsius),
            ("delete" | "del", [n]) => self.delete(n),
            ("redo", [n]) => return self.redo(n, line),
            ("model", [name]) => self.set_model(name),
            ("freq", [level]) => self.start_frequencies(level),
            ("levels", []) => {
                self.stage = Stage::Levels;
                Ok(Said::Levels)
            }
            _ => return self.entry(line),
        };
        done(answer)
    }

    fn ask(&self, applied: Applied, line: &str, then: Then) -> Step {
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
                return Outcome::Continue(Said::Cancelled { line: request.line })
            }
            Err(e) => return Outcome::Continue(Said::Refused(Refusal::Measure(e))),
        };
        // The sensor's mean when the stream carries one, else the temperature typed.
        let measured = Measured {
            temp_c: measured.temp_c.or(self.board_c),
            ..measured
        };
        let answer = match request.then {
            Then::Zero => Ok(self.set_zero(measured)),
            Then::Level(text) => self.add_level(&text, measured),
            Then::Redo(number) => self.replace(number, measured),
            Then::Frequency(hz) => self
                .session
                .add_frequency(hz, measured)
                .map(|correction| Said::Frequency {
                    measured,
                    hz,
                    correction,
                })
                .map_err(Refusal::from),
        };
        Outcome::Continue(answer.unwrap_or_else(Said::Refused))
    }

    fn set_zero(&mut self, measured: Measured) -> Said {
        self.session.base.adc.zero_counts = Some(measured.counts);
        if self.stage == Stage::Zero {
            self.stage = Stage::Levels;
        }
        Said::Zero(measured)
    }

    /// `temp C`: the board temperature for the points that follow, when the stream
    /// does not carry the board's sensor. Refused while points without one exist, since a
    /// profile's sets are told apart by temperature.
    fn set_board_temperature(&mut self, text: &str) -> Answer {
        let number = text.trim_end_matches("°C").trim_end_matches(['C', 'c']);
        let celsius = number
            .parse::<f64>()
            .ok()
            .filter(|c| (PLAUSIBLE_C.0..=PLAUSIBLE_C.1).contains(c))
            .ok_or_else(|| Refusal::Temperature(text.to_string()))?;
        let untagged = self.session.untagged();
        if !untagged.is_empty() {
            return Err(Refusal::Untagged(untagged));
        }
        self.board_c = Some(celsius);
        Ok(Said::BoardTemperature { celsius })
    }

    fn set_limit(&mut self, which: &str, level: &str) -> Answer {
        let dbm = parse_level(level, false)
            .map_err(Refusal::LimitLevel)?
            .power(self.session.ohms())
            .dbm();
        if !(-200.0..=100.0).contains(&dbm) {
            return Err(Refusal::LimitRange {
                level: level.to_string(),
                dbm,
            });
        }
        let limits = self.session.base.limits.get_or_insert(NO_LIMITS);
        let limit = match which {
            "detector" => {
                limits.detector_max_dbm = Some(dbm);
                Limit::Detector
            }
            "load" | "attenuator" => {
                limits.reference_max_dbm = Some(dbm);
                Limit::Load
            }
            other => return Err(Refusal::LimitWhich(other.to_string())),
        };
        Ok(Said::Limit { limit, dbm })
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
                .map_err(Refusal::Level),
            Stage::Frequencies => {
                parse_frequency(text)
                    .map_err(Refusal::Frequency)
                    .and_then(|hz| {
                        let (_, dbm) = self
                            .session
                            .freq_level
                            .clone()
                            .ok_or(Refusal::NoFrequencyLevel)?;
                        Ok(((dbm, hz), Then::Frequency(hz)))
                    })
            }
        };
        match applied {
            Ok((applied, then)) => self.ask(Some(applied), text, then),
            Err(e) => done(Err(e)),
        }
    }

    /// Adds a level's point, or replaces the point already taken at that level in the
    /// same calibration set (a set at another board temperature may repeat the level).
    fn add_level(&mut self, text: &str, measured: Measured) -> Answer {
        let (_, dbm) = self.session.parse_level(text)?;
        let ohms = self.session.ohms();
        let same_set = |c: Option<f64>| match (c, measured.temp_c) {
            (Some(a), Some(b)) => (a - b).abs() <= SET_GAP_K,
            (a, b) => a.is_none() && b.is_none(),
        };
        let same = self.session.points.iter().position(|p| {
            (p.level.power(ohms).dbm() - dbm).abs() < 1e-6 && same_set(p.measured.temp_c)
        });
        if let Some(index) = same {
            return self.replace(index + 1, measured);
        }
        self.session.add(text, measured)?;
        Ok(Said::Added(measured))
    }

    fn point_number(text: &str) -> Result<usize, Refusal> {
        text.parse()
            .map_err(|_| Refusal::PointNumber(text.to_string()))
    }

    fn delete(&mut self, n: &str) -> Answer {
        let removed = self.session.delete(Self::point_number(n)?)?;
        Ok(Said::Deleted {
            number: n.to_string(),
            removed,
        })
    }

    fn redo(&mut self, n: &str, line: &str) -> Step {
        let point = Self::point_number(n).and_then(|number| {
            let point = self
                .session
                .points
                .get(number.wrapping_sub(1))
                .ok_or(SessionError::NoPoint(number))?;
            Ok((number, point.level.power(self.session.ohms()).dbm()))
        });
        match point {
            Ok((number, dbm)) => self.ask(Some((dbm, self.reference_hz)), line, Then::Redo(number)),
            Err(e) => done(Err(e)),
        }
    }

    /// Puts a new measurement in place of point `number`, saying what it replaced.
    fn replace(&mut self, number: usize, measured: Measured) -> Answer {
        let (applied, was) = self
            .session
            .points
            .get(number.wrapping_sub(1))
            .map(|p| (p.applied.clone(), p.measured.counts))
            .ok_or(SessionError::NoPoint(number))?;
        self.session.redo(number, measured)?;
        Ok(Said::Replaced {
            number,
            applied,
            was,
            now: measured.counts,
        })
    }

    fn set_model(&mut self, name: &str) -> Answer {
        self.session.model =
            ModelKind::from_name(name).ok_or_else(|| Refusal::Model(name.to_string()))?;
        Ok(Said::Model {
            name: name.to_string(),
        })
    }

    fn start_frequencies(&mut self, level: &str) -> Answer {
        self.session.start_frequency_stage(level)?;
        self.stage = Stage::Frequencies;
        Ok(Said::FrequencyStage {
            level: level.to_string(),
        })
    }

    /// Each model's errors at the points: table, log, diode, in that order.
    pub fn fits(&self) -> Vec<ModelFit> {
        let session = &self.session;
        let cal_points = session.cal_points();
        [ModelKind::Table, ModelKind::Log, ModelKind::Diode]
            .into_iter()
            .map(|kind| {
                let errors = match kind {
                    ModelKind::Table => Some(
                        table_errors(&cal_points, session.kelvins().as_deref())
                            .iter()
                            .map(|e| e.unwrap_or(f64::NAN))
                            .collect(),
                    ),
                    _ => session.fitted(kind).ok().map(|p| p.residuals_db()),
                }
                .filter(|_: &Vec<f64>| session.points.len() >= kind.min_points());
                let finite: Vec<f64> = errors
                    .iter()
                    .flatten()
                    .copied()
                    .filter(|e| e.is_finite())
                    .collect();
                let rms = (!finite.is_empty()).then(|| rms(&finite));
                ModelFit { kind, errors, rms }
            })
            .collect()
    }

    /// The limits given so far (each may be missing).
    pub fn limits(&self) -> RawLimits {
        self.session.base.limits.clone().unwrap_or(NO_LIMITS)
    }

    fn save(&mut self, file: Option<&Path>) -> Outcome {
        let target = file.unwrap_or(&self.output.out).to_path_buf();
        match self.write_files(&target) {
            Ok(points) => Outcome::End(Ending::Saved {
                profile: target,
                points,
            }),
            Err(e) => Outcome::Continue(Said::NotSaved(e)),
        }
    }

    /// Writes the profile to `target` and its points CSV beside it; returns the latter.
    fn write_files(&self, target: &Path) -> anyhow::Result<PathBuf> {
        let points = points_path(target);
        let header = format!(
            "Written by dbtrail calibrate from {}.\nLevels applied at the detector input at {}; the raw points are kept below and in {}.",
            self.source,
            Si::new(self.reference_hz, "Hz"),
            points.display()
        );
        let profile = self.session.profile_text(&header)?;
        for path in [target, points.as_path()] {
            if path.exists() && !self.output.force {
                return Err(anyhow!(
                    "{} already exists, and calibrate was started without --force; \
                     `save` another file name (e.g. `save {}`)",
                    path.display(),
                    free_name(&target.with_extension(""), "toml").display()
                ));
            }
        }
        self.write_new(target, &profile)?;
        self.write_new(&points, &self.session.points_csv())?;
        Ok(points)
    }

    /// `quit`: with unsaved points, the first warns and the second leaves, keeping them.
    fn quit(&mut self, warned: bool) -> Outcome {
        let points = self.session.points.len();
        if points == 0 {
            return Outcome::End(Ending::LeftEmpty);
        }
        if !warned {
            self.quit_warned = true;
            return Outcome::Continue(Said::QuitWarned {
                points,
                path: self.kept_points_path(),
            });
        }
        match self.keep_points() {
            Ok(path) => Outcome::End(Ending::LeftKept { points, path }),
            Err(e) => Outcome::Continue(Said::Refused(Refusal::NotKept(e))),
        }
    }

    /// Where [`Desk::keep_points`] would write now.
    fn kept_points_path(&self) -> PathBuf {
        free_name(&self.output.out.with_extension("points"), "csv")
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
            .and_then(|()| (self.output.sync)(&file))
            .with_context(|| format!("cannot write {}", path.display()))?;
        Ok(path)
    }

    fn write_new(&self, path: &Path, text: &str) -> anyhow::Result<()> {
        if path.exists() && !self.output.force {
            return Err(anyhow!(
                "{} already exists; choose another --out or add --force",
                path.display()
            ));
        }
        let mut file = std::fs::File::create(path)
            .with_context(|| format!("cannot create {}", path.display()))?;
        file.write_all(text.as_bytes())
            .and_then(|()| (self.output.sync)(&file))
            .with_context(|| format!("cannot write {}", path.display()))
    }
}

/// The table model's error at each point with that point left out, within its
/// calibration set when the points carry board temperatures (each set is a curve).
fn table_errors(points: &[CalPoint], kelvins: Option<&[f64]>) -> Vec<Option<f64>> {
    let Some(kelvins) = kelvins else {
        return leave_one_out_db(points, Axis::LogVolts);
    };
    let mut errors = vec![None; points.len()];
    for (_, members) in temperature_groups(kelvins) {
        let set: Vec<CalPoint> = members.iter().map(|&i| points[i]).collect();
        for (&i, error) in members.iter().zip(leave_one_out_db(&set, Axis::LogVolts)) {
            errors[i] = error;
        }
    }
    errors
}

/// A step done at once, the session going on.
fn done(answer: Answer) -> Step {
    Step::Done(Outcome::Continue(answer.unwrap_or_else(Said::Refused)))
}

/// A `[limits]` table with neither limit given.
const NO_LIMITS: RawLimits = RawLimits {
    detector_max_dbm: None,
    reference_max_dbm: None,
};

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

/// `p.toml` → `p.points.csv`.
pub fn points_path(out: &Path) -> PathBuf {
    out.with_extension("points.csv")
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use dbtrail::procedure::{adc_settings, base_profile, SettleRule};
    use dbtrail::stats::Averaging;

    /// A desk over a 12-bit, 4.095 V ADC at 10 MHz, writing `t.toml`.
    pub(crate) fn desk() -> Desk {
        let base = base_profile("t", adc_settings(12, 4.095), 50.0, 10e6);
        let measuring = Measuring {
            rule: SettleRule::default(),
            averaging: Averaging::Samples(100),
        };
        let session = Session::new(base, ModelKind::Table);
        let output = Output {
            out: "t.toml".into(),
            force: false,
            sync: File::sync_data,
        };
        Desk::new(session, output, measuring, "a test".into())
    }

    /// A settled level of `counts`.
    pub(crate) fn at(counts: f64) -> Measured {
        Measured {
            counts,
            std_counts: 0.5,
            samples: 100,
            temp_c: None,
        }
    }

    /// Enters `line` and gives the measurement it asks for `counts`.
    fn measured(desk: &mut Desk, line: &str, counts: f64) -> Said {
        let Step::Measure(request) = desk.plan(line) else {
            panic!("`{line}` asks for a measurement");
        };
        match desk.finish(request, Ok(at(counts))) {
            Outcome::Continue(said) => said,
            Outcome::End(end) => panic!("`{line}` ended the session: {end:?}"),
        }
    }

    // Source: issue 16's decision: a level entered again replaces the earlier point and
    // says what it replaced; the generator is set to the level (-10 dBm) at the reference
    // frequency the profile was started with (10 MHz).
    #[test]
    fn a_level_entered_again_replaces_its_point_and_says_what_it_was() {
        let mut desk = desk();
        let Step::Measure(request) = desk.plan("-10dBm") else {
            panic!("a level asks for a measurement");
        };
        assert_eq!(request.applied, Some((-10.0, 10e6)));
        let first = desk.finish(request, Ok(at(500.0)));
        assert!(matches!(first, Outcome::Continue(Said::Added(m)) if m.counts == 500.0));
        let again = measured(&mut desk, "-10dBm", 510.0);
        assert!(
            matches!(&again, Said::Replaced { number: 1, applied, was, now }
                if applied == "-10dBm" && *was == 500.0 && *now == 510.0),
            "{again:?}"
        );
        assert_eq!(desk.session.points.len(), 1);
    }

    // Source: the desk's stated range for a limit, -200 to +100 dBm, and
    // dBm = 10·log10(P / 1 mW) (5 W is 36.99 dBm): a limit out of range changes nothing.
    #[test]
    fn a_limit_out_of_range_is_refused_and_changes_nothing() {
        let mut desk = desk();
        let Step::Done(Outcome::Continue(said)) = desk.plan("limit load 150dBm") else {
            panic!("a limit is set at once");
        };
        assert!(
            matches!(said, Said::Refused(Refusal::LimitRange { dbm, .. }) if dbm == 150.0),
            "{said:?}"
        );
        assert_eq!(desk.limits().reference_max_dbm, None);
        let Step::Done(Outcome::Continue(Said::Limit { limit, dbm })) = desk.plan("limit load 5W")
        else {
            panic!("a limit in range is taken");
        };
        assert_eq!(limit, Limit::Load);
        assert!((dbm - 36.99).abs() < 0.005, "{dbm}");
        assert_eq!(desk.limits().reference_max_dbm, Some(dbm));
    }

    // Source: docs/calibration.md (calibrate, a second set): the table model's error is
    // each point's with it left out of its own set, so two sets of the same counts give
    // the errors one set alone gives (the plain leave-one-out as the reference), and
    // points more than SET_GAP_K apart are two sets.
    #[test]
    fn a_repeated_set_at_another_temperature_gets_the_table_errors_of_one_set() {
        let mut desk = desk();
        desk.plan("temp 25");
        let levels = [
            ("-20dBm", 100.0),
            ("-10dBm", 300.0),
            ("0dBm", 900.0),
            ("10dBm", 2500.0),
        ];
        for (level, counts) in levels {
            measured(&mut desk, level, counts);
        }
        let one_set = leave_one_out_db(&desk.session.cal_points(), Axis::LogVolts);
        desk.plan("temp 40");
        for (level, counts) in levels {
            let said = measured(&mut desk, level, counts);
            assert!(
                matches!(said, Said::Added(m) if m.temp_c == Some(40.0)),
                "{said:?}"
            );
        }
        let Some(errors) = desk.fits()[0].errors.clone() else {
            panic!("the table has errors");
        };
        for (i, expected) in one_set.iter().chain(&one_set).enumerate() {
            let got = Some(errors[i]).filter(|e| e.is_finite());
            assert_eq!(got, *expected, "point {}", i + 1);
        }
        assert!(one_set.iter().any(Option::is_some));
    }

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
