//! The words both calibrate front ends show for the desk's data: the help, the prompt, the
//! points table, and what each step says. Each front end places them its own way: the
//! line prompts print the table after a step that changed it, the screen keeps the table
//! in a pane of its own and shows only the step's words.

use std::fmt::Write as _;
use std::path::Path;

use dbtrail::detector::thermal::SET_GAP_K;
use dbtrail::procedure::{MeasureError, Measured, Session};
use dbtrail::thermal::PLAUSIBLE_C;
use dbtrail::units::Si;

use super::{Desk, Ending, Limit, Refusal, Said, Stage};

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
  levels   back to the level stage   temp C   board °C of the next points
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

/// The prompt for the next line.
pub fn prompt(desk: &Desk) -> String {
    match (desk.stage, &desk.session.freq_level) {
        (Stage::Zero, _) => ZERO_PROMPT.into(),
        (Stage::Frequencies, Some((level, _))) => format!("frequency at {level}> "),
        // The temperature typed tags each point that follows: keep it in view.
        _ => match desk.board_c {
            Some(celsius) => format!("level (board {celsius} °C)> "),
            None => "level> ".into(),
        },
    }
}

/// Whether `said` changed what the points table shows (or asked for it).
pub fn shows_table(said: &Said) -> bool {
    matches!(
        said,
        Said::Table
            | Said::Added(_)
            | Said::Replaced { .. }
            | Said::Deleted { .. }
            | Said::Model { .. }
    )
}

/// What a step says, without the points table.
pub fn message(desk: &Desk, said: &Said) -> String {
    match said {
        Said::Nothing | Said::Table => String::new(),
        Said::Help => HELP.into(),
        Said::ZeroSkipped { zero_counts } => {
            format!("zero skipped: zero_counts stays {zero_counts}\n{LIMITS_HINT}")
        }
        Said::Zero(m) => format!(
            "{}\nthe ADC zero is {:.2} counts with RF off; it is saved as zero_counts in [adc]\n{LIMITS_HINT}",
            describe(m),
            m.counts
        ),
        Said::BoardTemperature { celsius } => format!(
            "the next points are tagged temp_c = {celsius} (the board's temperature, °C); a \
             set {SET_GAP_K} K or more away is a calibration set of its own"
        ),
        Said::Limit { limit, dbm } => format!(
            "{}: {dbm:.2} dBm, saved in [limits]; readings above it are flagged (the limits \
             cannot protect the hardware)",
            match limit {
                Limit::Detector => "the detector's safe input (detector_max_dbm)",
                Limit::Load => "the load's or attenuator's rating (reference_max_dbm)",
            }
        ),
        Said::Deleted { number, removed } => {
            format!("deleted point {number} ({})", removed.applied)
        }
        Said::Added(m) => describe(m),
        Said::Replaced {
            number,
            applied,
            was,
            now,
        } => format!("replaced point {number} (was {was:.2} counts, now {now:.2}) at {applied}"),
        Said::Model { name } => format!("the {name} model will be saved"),
        Said::FrequencyStage { level } => format!(
            "frequency stage: keep the generator at {level} and enter each frequency you set it to \
             (e.g. 146MHz); `levels` goes back, `save` writes the profile"
        ),
        Said::Levels => "back to levels at the reference frequency".into(),
        Said::Frequency {
            measured,
            hz,
            correction,
        } => format!(
            "{}\ncorrection at {}: {correction:+.3} dB (true minus indicated)\n{}",
            describe(measured),
            Si::new(*hz, "Hz"),
            frequency_table(&desk.session)
        ),
        Said::Cancelled { line } => format!("{line}: {}", MeasureError::Cancelled),
        Said::QuitWarned { points, path } => format!(
            "{} not saved: `save` writes them, `quit` again leaves and keeps them in {}",
            counted_points(*points),
            path.display()
        ),
        Said::Refused(why) => format!(
            "{}\n(nothing was changed; the session goes on)",
            refusal(why)
        ),
        Said::NotSaved(e) => format!("{e:#}\n(nothing was written; the session goes on)"),
    }
}

/// Why a line changed nothing.
fn refusal(why: &Refusal) -> String {
    match why {
        Refusal::Level(e) => format!("{e}\n(type `help` for the commands)"),
        Refusal::Frequency(e) => {
            format!("{e}\n(in the frequency stage enter a frequency; `levels` goes back)")
        }
        Refusal::LimitLevel(e) => format!("{e}\n(give the limit as a power, e.g. 20dBm or 5W)"),
        Refusal::LimitRange { level, dbm } => {
            format!("`{level}` is {dbm:.1} dBm; a limit lies from -200 to +100 dBm")
        }
        Refusal::LimitWhich(other) => {
            format!("`limit {other}`: say `limit detector LEVEL` or `limit load LEVEL`")
        }
        Refusal::PointNumber(text) => {
            format!("`{text}` is not a point number; the points are numbered from 1")
        }
        Refusal::Model(name) => format!("unknown model `{name}`; choose table, diode or log"),
        Refusal::NoFrequencyLevel => "no level for the frequency stage".into(),
        Refusal::Session(e) => with_causes(e),
        Refusal::Measure(e) => with_causes(e),
        Refusal::NotKept(e) => format!("{e:#}"),
        Refusal::Temperature(text) => format!(
            "`temp {text}`: give the board's temperature in °C, from {} to {} (e.g. `temp 25`)",
            PLAUSIBLE_C.0, PLAUSIBLE_C.1
        ),
        Refusal::Untagged(numbers) => format!(
            "point(s) {} were taken without a board temperature: a profile tells its sets \
             apart by temperature, so `delete` them or give `temp` before the first point",
            numbers
                .iter()
                .map(ToString::to_string)
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// An error and each of its causes, `: `-separated.
fn with_causes(error: &(dyn std::error::Error + 'static)) -> String {
    let mut out = error.to_string();
    let mut cause = error.source();
    while let Some(e) = cause {
        let _ = write!(out, ": {e}");
        cause = e.source();
    }
    out
}

/// How the session ended.
pub fn ending(end: &Ending) -> String {
    match end {
        Ending::Saved { profile, points } => {
            format!("wrote {} and {}", profile.display(), points.display())
        }
        Ending::LeftEmpty => "left; nothing was measured, nothing written".into(),
        Ending::LeftKept { points, path } => {
            format!("left without saving the profile; {}", kept(*points, path))
        }
    }
}

/// Where `n` points were kept, and how to make a profile of them.
pub fn kept(n: usize, path: &Path) -> String {
    format!(
        "{} kept in {} (`dbtrail fit {}` makes a profile of them)",
        counted_points(n),
        path.display(),
        path.display()
    )
}

/// `1 point`, `3 points`.
fn counted_points(n: usize) -> String {
    if n == 1 {
        "1 point".into()
    } else {
        format!("{n} points")
    }
}

fn describe(m: &Measured) -> String {
    let board = m
        .temp_c
        .map_or(String::new(), |c| format!(", board {c:.2} °C"));
    format!(
        "settled: {:.2} counts (±{:.2}, {} samples{board})",
        m.counts, m.std_counts, m.samples
    )
}

/// The points with each model's fit, the RMS errors and the warnings.
pub fn table(desk: &Desk) -> String {
    let session = &desk.session;
    let fits = desk.fits();
    // With board temperatures, their column takes the place of the samples' (each
    // point's line says how many), so that the table still fits 80 columns.
    let tagged = session.points.iter().any(|p| p.measured.temp_c.is_some());
    let last = if tagged { "°C" } else { "n" };
    let mut out = format!(" #  applied          counts      ±std {last:>7}");
    for fit in &fits {
        let _ = write!(out, "  {:>9}", format!("{} dB", fit.kind.name()));
    }
    out.push('\n');
    for (i, p) in session.points.iter().enumerate() {
        let m = &p.measured;
        let last = match tagged {
            true => shown(m.temp_c.map(|c| format!("{c:.2}"))),
            false => m.samples.to_string(),
        };
        let _ = write!(
            out,
            "{:>2}  {:<12} {:>10.2} {:>9.2} {last:>7}",
            i + 1,
            p.applied,
            m.counts,
            m.std_counts,
        );
        for fit in &fits {
            let cell = fit
                .errors
                .as_ref()
                .and_then(|e| e.get(i))
                .filter(|e| e.is_finite());
            let _ = write!(out, "  {:>9}", shown(cell.map(|e| format!("{e:+.3}"))));
        }
        out.push('\n');
    }
    let _ = write!(out, "    RMS error{:>32}", "");
    for fit in &fits {
        let _ = write!(out, "  {:>9}", shown(fit.rms.map(|r| format!("{r:.3}"))));
    }
    let _ = writeln!(
        out,
        "\n    (model minus applied, dB; table: the error with that point left out)"
    );
    let _ = writeln!(
        out,
        "    saving model: {} · {}\n    limits: {}",
        session.model,
        zero_text(session),
        limits_text(desk)
    );
    for warning in session.warnings() {
        let _ = writeln!(out, "  ! {warning}");
    }
    out
}

/// A cell's text, `·` where there is none.
fn shown(cell: Option<String>) -> String {
    cell.unwrap_or_else(|| "·".into())
}

fn zero_text(session: &Session) -> String {
    match session.base.adc.zero_counts {
        Some(zero) => format!("zero {zero:.2} counts"),
        None => "zero not measured (0 counts taken)".into(),
    }
}

fn limits_text(desk: &Desk) -> String {
    let limits = desk.limits();
    let show = |v: Option<f64>| v.map_or("not given".into(), |d| format!("{d:.1} dBm"));
    format!(
        "detector {}, load {}",
        show(limits.detector_max_dbm),
        show(limits.reference_max_dbm)
    )
}

/// The frequency entries with their corrections.
fn frequency_table(session: &Session) -> String {
    let mut out = String::from("  frequency      counts   correction dB\n");
    for e in &session.freq_entries {
        let c = shown(session.correction_at(e.hz).ok().map(|c| format!("{c:+.3}")));
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
