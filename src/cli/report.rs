//! `dbtrail report`: the figures of a recorded soak, as text or JSON, and a plot. A log
//! appended to with another profile or spacing holds several runs, reported one by one.

use std::collections::BTreeMap;
use std::path::PathBuf;

use anyhow::{anyhow, Context};
use dbtrail::report::matched::{summarise, MatchSummary};
use dbtrail::report::{
    analyse_compensated, extreme_bound, read_log_folded, span_rows, Reduction, Report,
    ReportOptions, Run,
};
use dbtrail::stats::Bound;
use dbtrail::units::{format_clock, parse_duration, watts_to_dbm};
use serde::Serialize;
use serde_json::Value;

use super::{emit, BadInput, Failure, Runtime};

mod plot;
#[cfg(test)]
mod sample;
mod text;

#[derive(clap::Args)]
pub struct Args {
    /// A log written by `dbtrail record` or by logging in `dbtrail watch`
    log: PathBuf,
    /// Print JSON instead of the table: one object, or an array with one per run
    #[arg(long)]
    json: bool,
    /// Draw the run to this file, SVG or PNG by its extension
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Replace an existing plot file
    #[arg(long)]
    force: bool,
    /// Size of the plot in pixels, WIDTHxHEIGHT
    #[arg(long, default_value = "1200x700", allow_hyphen_values = true, value_parser = parse_size)]
    size: (u32, u32),
    /// The warm-up is over, and the output settled, once the warm-up term stays within ± this many dB
    #[arg(long, default_value = "0.1dB", allow_hyphen_values = true, value_parser = parse_tolerance)]
    settle_tol: f64,
    /// Start of the span to report on, time since the run started (e.g. 30m, 1h30m, or as the report prints times: 1:05:10, 54:50, 3910 s, 2 min 40 s)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_seconds)]
    from: Option<f64>,
    /// End of the span, time since the run started (e.g. 2h, 2:00:00, or 1 h 25 min 20 s)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_seconds)]
    to: Option<f64>,
    /// Channel to report on, from 1 (a coupler run: 1 the forward arm, 2 the reflected)
    #[arg(long, default_value_t = 1, allow_hyphen_values = true, value_parser = parse_channel)]
    channel: u64,
    /// Fold the rows into intervals of this width while reading (e.g. 1s, 10s, 1m); without it a log of more than 100000 rows is folded into the smallest width of 1 s times a power of two (or its own interval times one) that keeps it within 100000 intervals, and a wider one if the rows still pass that
    #[arg(long, allow_hyphen_values = true, value_parser = parse_every)]
    every: Option<f64>,
    /// Report on this run only, from 1, when the log holds several (a `# resumed` line that changed the profile or the rows' spacing starts one)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_run)]
    run: Option<usize>,
}

/// Plot formats by file extension.
const PLOT_EXTENSIONS: [&str; 2] = ["svg", "png"];

/// A time since the run started: a duration (`30m`, `1h30m`) or a clock reading as the
/// report prints times (`1:05:10`, `05:10`).
fn parse_seconds(text: &str) -> Result<f64, String> {
    if text.contains(':') {
        return parse_clock(text).ok_or_else(|| {
            format!(
                "`{text}` is not a time; give h:mm:ss or m:ss as the report prints times \
                 (e.g. 1:05:10 or 05:10), or a duration such as 30m or 1h30m"
            )
        });
    }
    parse_duration(text)
        .map(|d| d.as_secs_f64())
        .map_err(|e| e.to_string())
}

/// `h:mm:ss` or `m:ss`, minutes and seconds under 60 where a larger unit leads, the
/// seconds perhaps with a fraction.
fn parse_clock(text: &str) -> Option<f64> {
    let parts: Vec<&str> = text.trim().split(':').collect();
    if !(2..=3).contains(&parts.len()) {
        return None;
    }
    let (leading, seconds) = parts.split_at(parts.len() - 1);
    let whole = |p: &str| {
        (!p.is_empty() && p.bytes().all(|b| b.is_ascii_digit()))
            .then(|| p.parse::<f64>().ok())
            .flatten()
    };
    let (whole_s, fraction) = seconds[0].split_once('.').unwrap_or((seconds[0], ""));
    let s = whole(whole_s)?
        + if fraction.is_empty() {
            0.0
        } else {
            whole(fraction)? / 10f64.powi(fraction.len() as i32)
        };
    let units: Vec<f64> = leading.iter().map(|p| whole(p)).collect::<Option<_>>()?;
    let in_range = s < 60.0 && (units.len() == 1 || units[1] < 60.0);
    let total = units.iter().fold(0.0, |acc, u| acc * 60.0 + u) * 60.0 + s;
    (in_range && total.is_finite()).then_some(total)
}

/// The width of `--every`: a positive duration.
fn parse_every(text: &str) -> Result<f64, String> {
    match parse_duration(text).map(|d| d.as_secs_f64()) {
        Ok(s) if s > 0.0 => Ok(s),
        Ok(_) => Err(format!(
            "`{text}` is no interval to fold rows into; give a positive duration such as 1s or 10s"
        )),
        Err(e) => Err(e.to_string()),
    }
}

fn parse_size(text: &str) -> Result<(u32, u32), String> {
    let parsed = text
        .split_once(['x', 'X'])
        .and_then(|(w, h)| Some((w.trim().parse().ok()?, h.trim().parse().ok()?)));
    match parsed {
        Some((w, h)) if (200..=8000).contains(&w) && (150..=8000).contains(&h) => Ok((w, h)),
        _ => Err(format!(
            "`{text}` is not a plot size; give WIDTHxHEIGHT in pixels, e.g. 1200x700 (200 to 8000)"
        )),
    }
}

fn parse_tolerance(text: &str) -> Result<f64, String> {
    match super::parse_db_arg(text)? {
        db if db > 0.0 => Ok(db),
        _ => Err(format!(
            "`{text}` is not a settling tolerance; give a positive number of dB, e.g. 0.1dB"
        )),
    }
}

fn parse_channel(text: &str) -> Result<u64, String> {
    match text.trim().parse::<u64>() {
        Ok(n) if (1..=8).contains(&n) => Ok(n),
        _ => Err(format!("`{text}` is not a channel; give 1 to 8")),
    }
}

fn parse_run(text: &str) -> Result<usize, String> {
    match text.trim().parse::<usize>() {
        Ok(n) if n >= 1 => Ok(n),
        _ => Err(format!(
            "`{text}` is not a run number; give 1 for the first run of the log, 2 for the next"
        )),
    }
}

pub fn run(args: Args) -> Result<(), Failure> {
    check_plot_target(&args)?;
    check_span(args.from, args.to)?;
    let origin = args.log.display().to_string();
    let file = std::fs::File::open(&args.log)
        .with_context(|| format!("cannot read {origin}"))
        .bad_input()?;
    let reduction = Reduction {
        width_s: args.every,
        ..Reduction::default()
    };
    let log = read_log_folded(
        std::io::BufReader::with_capacity(1 << 16, file),
        &origin,
        args.channel as usize,
        reduction,
    )
    .bad_input()?;
    let runs = chosen_runs(&log.runs, args.run, &origin)?;
    if runs.len() > 1 && args.plot.is_some() {
        return Err(anyhow!(
            "{origin} holds {} runs (a `# resumed` line changed the profile or the rows' \
             spacing); add --run N to choose the one to draw",
            runs.len()
        ))
        .bad_input();
    }
    let options = ReportOptions {
        settle_tol_db: args.settle_tol,
        from_s: args.from,
        to_s: args.to,
    };
    let several = log.runs.len() > 1;
    let reports = runs
        .iter()
        .map(|run| {
            let label = run_label(&origin, run, several);
            analyse_compensated(run, log.compensation_of(run), &label, &options)
        })
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| match runs.len() {
            1 => anyhow::Error::new(e),
            n => anyhow!(
                "{e}; the report covers each of the log's {n} runs: add --run N to report on one"
            ),
        })
        .bad_input()?;
    if let Some(path) = &args.plot {
        plot::plot(path, args.size, runs[0], &reports[0], &options).runtime()?;
        say_err!("dbtrail: plot written to {}", path.display());
    }
    let matched = match_summary(&args, &origin)?;
    let text = if args.json {
        json(&runs, &reports, &options, matched.as_ref()).map_err(|e| Failure::Runtime(e.into()))?
    } else {
        let read = match (&matched, args.channel) {
            (Some(_), 2) => "the reflected arm (--channel 2)".to_string(),
            (Some(_), _) => "the forward arm (--channel 2 for the reflected)".to_string(),
            (None, channel) => format!("channel {channel}"),
        };
        let mut text = text_report(&origin, &read, log.runs.len(), &runs, &reports, &options);
        if let Some(summary) = &matched {
            text.push_str(&text::match_table(summary, log.runs.len()));
        }
        text
    };
    emit(&text)
}

/// The match over a coupler run's log (a second pass over the file, its rows in the span
/// asked for); None for one detector's.
fn match_summary(args: &Args, origin: &str) -> Result<Option<MatchSummary>, Failure> {
    let file = std::fs::File::open(&args.log)
        .with_context(|| format!("cannot read {origin}"))
        .bad_input()?;
    let input = std::io::BufReader::with_capacity(1 << 16, file);
    summarise(input, origin, args.from, args.to).bad_input()
}

/// The whole text report: a heading, a section per run and, for several, the runs
/// together.
fn text_report(
    origin: &str,
    read: &str,
    in_log: usize,
    runs: &[&Run],
    reports: &[Report],
    options: &ReportOptions,
) -> String {
    let mut out = format!("Soak report: {origin}, {read}");
    if let ([run], true) = (runs, in_log > 1) {
        out.push_str(&format!(
            ", run {} of {in_log} (from line {})",
            run.number, run.first_line
        ));
    } else if in_log > 1 {
        out.push_str(&format!(
            ", {} runs (at each `# resumed` line that changed the profile or the rows' spacing)",
            runs.len()
        ));
    }
    out.push('\n');
    for (run, report) in runs.iter().zip(reports) {
        if runs.len() > 1 {
            out.push_str(&format!(
                "\nRun {} of {in_log}, from line {}\n",
                run.number, run.first_line
            ));
        }
        out.push_str(&text::table(run, report, options));
    }
    if runs.len() > 1 {
        out.push_str(&format!("\nAll {} runs together\n", runs.len()));
        out.push_str(&text::together_table(&together(runs, reports, options)));
    }
    out
}

/// A plot needs a format it can draw and may not replace a file unasked: both are known
/// before the log is read.
fn check_plot_target(args: &Args) -> Result<(), Failure> {
    let Some(path) = &args.plot else {
        return Ok(());
    };
    let extension = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    if !extension.is_some_and(|e| PLOT_EXTENSIONS.contains(&e.as_str())) {
        return Err(anyhow!(
            "--plot {}: cannot tell the plot format from the file name; name it .svg or .png \
             (the extensions supported: {})",
            path.display(),
            PLOT_EXTENSIONS.map(|e| format!(".{e}")).join(", ")
        ))
        .bad_input();
    }
    if path.exists() && !args.force {
        return Err(anyhow!(
            "{} already exists; choose another --plot or add --force to replace it",
            path.display()
        ))
        .bad_input();
    }
    Ok(())
}

fn check_span(from: Option<f64>, to: Option<f64>) -> Result<(), Failure> {
    match (from, to) {
        (Some(from), Some(to)) if from > to => Err(anyhow!(
            "--from {} ({from} s) is after --to {} ({to} s): the span would be empty; give a \
             --from before --to",
            format_clock(from),
            format_clock(to)
        ))
        .bad_input(),
        _ => Ok(()),
    }
}

fn chosen_runs<'a>(
    runs: &'a [Run],
    wanted: Option<usize>,
    origin: &str,
) -> Result<Vec<&'a Run>, Failure> {
    let Some(n) = wanted else {
        return Ok(runs.iter().collect());
    };
    match runs.get(n - 1) {
        Some(run) => Ok(vec![run]),
        None => Err(anyhow!(
            "--run {n}: {origin} holds {} run{} (starting at line{} {}); give one of those",
            runs.len(),
            if runs.len() == 1 { "" } else { "s" },
            if runs.len() == 1 { "" } else { "s" },
            runs.iter()
                .map(|r| r.first_line.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ))
        .bad_input(),
    }
}

/// Where a run's messages say they are: the file, and the run when there are several.
fn run_label(origin: &str, run: &Run, several: bool) -> String {
    if several {
        format!(
            "{origin}, run {} (from line {})",
            run.number, run.first_line
        )
    } else {
        origin.to_string()
    }
}

/// The figures of several runs that still mean something taken together: how long and
/// how many, the mean power over watts and the extremes. The model, warm-up, drift and
/// Allan deviation are left to each run, since every run starts its own warm-up.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub(crate) struct Together {
    duration_s: f64,
    samples: u64,
    mean_dbm: Option<f64>,
    mean_w: Option<f64>,
    /// As in a run: null for a value, else the bound's cell text.
    mean_bound: Option<&'static str>,
    #[serde(skip)]
    bound: Bound,
    min_dbm: f64,
    /// As in a run.
    #[serde(serialize_with = "bound_cell")]
    pub(crate) min_bound: Bound,
    max_dbm: f64,
    #[serde(serialize_with = "bound_cell")]
    pub(crate) max_bound: Bound,
    pk_pk_db: f64,
    gaps: u64,
    gap_s: f64,
    flagged_rows: BTreeMap<String, u64>,
}

/// The weight a run's mean power carries among runs: the samples in its rows' means, as
/// each row is weighted inside a run.
fn run_weight(run: &Run, options: &ReportOptions) -> f64 {
    span_rows(run, options)
        .iter()
        .filter(|r| r.mean_dbm.is_some())
        .map(|r| r.averaged.max(1) as f64)
        .sum()
}

fn together(runs: &[&Run], reports: &[Report], options: &ReportOptions) -> Together {
    let bound = reports
        .iter()
        .fold(Bound::Exact, |b, r| b.join(r.mean_bound));
    let weighted: Option<(f64, f64)> =
        runs.iter()
            .zip(reports)
            .try_fold((0.0, 0.0), |(sum, weights), (run, report)| {
                let w = run_weight(run, options);
                Some((sum + report.mean_w? * w, weights + w))
            });
    let mean_w = weighted
        .filter(|(_, weights)| *weights > 0.0 && bound != Bound::Unknown)
        .map(|(sum, weights)| sum / weights);
    let min_dbm = reports
        .iter()
        .map(|r| r.min_dbm)
        .fold(f64::INFINITY, f64::min);
    let max_dbm = reports
        .iter()
        .map(|r| r.max_dbm)
        .fold(f64::NEG_INFINITY, f64::max);
    let min_bound = extreme_bound(
        reports.iter().map(|r| (r.min_dbm, r.min_bound)),
        min_dbm,
        Bound::AtMost,
    );
    let max_bound = extreme_bound(
        reports.iter().map(|r| (r.max_dbm, r.max_bound)),
        max_dbm,
        Bound::AtLeast,
    );
    let mut flagged_rows = BTreeMap::new();
    for (flag, n) in reports.iter().flat_map(|r| &r.flagged_rows) {
        *flagged_rows.entry(flag.clone()).or_insert(0) += n;
    }
    Together {
        duration_s: reports.iter().map(|r| r.duration_s).sum(),
        samples: reports.iter().map(|r| r.samples).sum(),
        mean_dbm: mean_w.map(watts_to_dbm),
        mean_w,
        mean_bound: (bound != Bound::Exact).then(|| bound.cell()),
        bound,
        min_dbm,
        min_bound,
        max_dbm,
        max_bound,
        pk_pk_db: max_dbm - min_dbm,
        gaps: reports.iter().map(|r| r.gaps).sum(),
        gap_s: reports.iter().map(|r| r.gap_s).sum(),
        flagged_rows,
    }
}

/// A bound in JSON: null for a value, else the log's cell text.
fn bound_cell<S: serde::Serializer>(bound: &Bound, serializer: S) -> Result<S::Ok, S::Error> {
    match bound {
        Bound::Exact => serializer.serialize_none(),
        other => serializer.serialize_str(other.cell()),
    }
}

/// A struct's fields as a JSON object, to add keys to.
fn object_of(value: &impl Serialize) -> serde_json::Result<serde_json::Map<String, Value>> {
    match serde_json::to_value(value)? {
        Value::Object(object) => Ok(object),
        other => Err(serde::ser::Error::custom(format!(
            "the report's figures made {other} where an object was due"
        ))),
    }
}

/// One run's object: the report's keys.
fn run_object(report: &Report) -> serde_json::Result<serde_json::Map<String, Value>> {
    object_of(report)
}

/// One object for a single run, with the figures at the top level; for several runs,
/// one object with the figures taken together at the top level and `runs`, one object
/// per run with its number and first line.
fn json(
    runs: &[&Run],
    reports: &[Report],
    options: &ReportOptions,
    matched: Option<&MatchSummary>,
) -> serde_json::Result<String> {
    let mut value = if let [report] = reports {
        Value::Object(run_object(report)?)
    } else {
        let per_run = runs
            .iter()
            .zip(reports)
            .map(|(run, report)| {
                let mut object = run_object(report)?;
                object.insert("run".into(), run.number.into());
                object.insert("first_line".into(), run.first_line.into());
                Ok(Value::Object(object))
            })
            .collect::<serde_json::Result<Vec<_>>>()?;
        let mut all = object_of(&together(runs, reports, options))?;
        all.insert("runs".into(), Value::Array(per_run));
        Value::Object(all)
    };
    if let (Some(summary), Value::Object(object)) = (matched, &mut value) {
        object.insert("match".into(), serde_json::to_value(summary)?);
    }
    Ok(format!("{}\n", serde_json::to_string(&value)?))
}
