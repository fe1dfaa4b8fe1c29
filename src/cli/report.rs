//! `dbtrail report`: the figures of a recorded soak, as text or JSON, and a plot. A log
//! appended to with another profile or spacing holds several runs, reported one by one.

use std::path::{Path, PathBuf};

use anyhow::{anyhow, Context};
use dbtrail::report::{
    analyse, decimate, read_log, span_rows, Report, ReportOptions, Run, Spacing,
};
use dbtrail::stats::Bound;
use dbtrail::units::{format_clock, parse_duration, Si};
use plotters::coord::Shift;
use plotters::prelude::*;
use serde::Serialize;

use super::{emit, parse_duration_arg, BadInput, Failure, Runtime};

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
    /// Settled means every interval stays within ± this many dB of the final mean
    #[arg(long, default_value = "0.1dB", allow_hyphen_values = true, value_parser = parse_tolerance)]
    settle_tol: f64,
    /// The final window whose mean is the settled level (default 10m, or the last fifth of a shorter log)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_duration_arg)]
    settle_window: Option<std::time::Duration>,
    /// Start of the span to report on, time since the run started (e.g. 30m, or 0:30:00 as the report prints times)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_seconds)]
    from: Option<f64>,
    /// End of the span, time since the run started (e.g. 2h, or 2:00:00)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_seconds)]
    to: Option<f64>,
    /// Channel to report on, from 1
    #[arg(long, default_value_t = 1, allow_hyphen_values = true, value_parser = parse_channel)]
    channel: u64,
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
    let bytes = std::fs::read(&args.log)
        .with_context(|| format!("cannot read {origin}"))
        .bad_input()?;
    let log = read_log(&bytes, &origin, args.channel as usize).bad_input()?;
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
        settle_window_s: args.settle_window.map(|d| d.as_secs_f64()),
        from_s: args.from,
        to_s: args.to,
    };
    let several = log.runs.len() > 1;
    let reports = runs
        .iter()
        .map(|run| analyse(run, &run_label(&origin, run, several), &options))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| match runs.len() {
            1 => anyhow::Error::new(e),
            n => anyhow!(
                "{e}; the report covers each of the log's {n} runs: add --run N to report on one"
            ),
        })
        .bad_input()?;
    if let Some(path) = &args.plot {
        plot(path, args.size, runs[0], &reports[0], &options).runtime()?;
    }
    let text = if args.json {
        json(&runs, &reports).map_err(|e| Failure::Runtime(e.into()))?
    } else {
        let mut out = format!("Soak report: {origin}, channel {}", args.channel);
        if let ([run], true) = (runs.as_slice(), several) {
            out.push_str(&format!(
                ", run {} of {} (from line {})",
                run.number,
                log.runs.len(),
                run.first_line
            ));
        } else if several {
            out.push_str(&format!(
                ", {} runs (at each `# resumed` line that changed the profile or the rows' spacing)",
                runs.len()
            ));
        }
        out.push('\n');
        for (run, report) in runs.iter().zip(&reports) {
            if runs.len() > 1 {
                out.push_str(&format!(
                    "\nRun {} of {}, from line {}\n",
                    run.number,
                    log.runs.len(),
                    run.first_line
                ));
            }
            out.push_str(&table(run, report, &options));
        }
        out
    };
    emit(&text)
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

/// One run's figures in a JSON array of runs.
#[derive(Serialize)]
struct RunReport<'a> {
    run: usize,
    first_line: u64,
    #[serde(flatten)]
    report: &'a Report,
}

/// The mean power line: its bound before the number, or why there is no number.
fn mean_power(r: &Report) -> String {
    let (Some(dbm), Some(w)) = (r.mean_dbm, r.mean_w) else {
        return "none: rows counted samples at bounds both ways (clipped or above the span, \
                and below it), so no bound holds"
            .into();
    };
    let lead = match r.mean_bound {
        Bound::AtLeast => "at least ",
        Bound::AtMost => "at most ",
        Bound::Exact | Bound::Unknown => "",
    };
    let why = match r.mean_bound {
        Bound::AtLeast => "; clipped or above-span samples counted at their bound",
        Bound::AtMost => "; below-span samples counted at the span's bottom",
        Bound::Exact | Bound::Unknown => "",
    };
    format!(
        "{lead}{dbm:+.3} dBm ({}), averaged over watts{why}",
        Si::new(w, "W")
    )
}

/// The uncertainty line: the mean's expanded uncertainty and what it leaves out, or why
/// there is none.
fn mean_uncertainty(r: &Report) -> String {
    let left_out = r
        .u_leaves_out
        .as_deref()
        .map_or(String::new(), |terms| format!("; leaves out: {terms}"));
    match (r.mean_u_db, r.mean_bound) {
        (Some(u), _) => format!(
            "±{u:.3} dB (k = 2), the rows' own taken as systematic, so not reduced by their \
             number{left_out}"
        ),
        (None, Bound::Exact) => {
            "not known: rows with a mean carry no u_db (a log from before that column, or \
             rows without the noise of their counts)"
                .into()
        }
        (None, _) => "none: the mean is a bound, not a value".into(),
    }
}

/// One object for a single run, as always; an array of objects, each with its run's number
/// and first line, for several.
fn json(runs: &[&Run], reports: &[Report]) -> serde_json::Result<String> {
    let text = if let [report] = reports {
        serde_json::to_string(report)?
    } else {
        let all: Vec<RunReport> = runs
            .iter()
            .zip(reports)
            .map(|(run, report)| RunReport {
                run: run.number,
                first_line: run.first_line,
                report,
            })
            .collect();
        serde_json::to_string(&all)?
    };
    Ok(format!("{text}\n"))
}

/// How the rows are spaced, in words: `rows of 10 s`, `rows, one per sample at 1000
/// samples/s`.
fn spacing_words(spacing: Spacing) -> String {
    match spacing {
        Spacing::Interval(s) | Spacing::MedianStep(s) => format!("rows of {}", Si::new(s, "s")),
        Spacing::Rate(rate) => format!("rows, one per sample at {rate} samples/s"),
        Spacing::Clock(_) => format!(
            "rows, one per sample stamped by the clock (a gap is a step over {})",
            Si::new(spacing.longest_step_s(), "s")
        ),
    }
}

fn table(run: &Run, r: &Report, options: &ReportOptions) -> String {
    let mut out = String::new();
    for key in ["profile:", "frequency:", "source:", "started:"] {
        if let Some(value) = run.context_value(key) {
            out.push_str(&format!("  {:<13} {value}\n", key.trim_end_matches(':')));
        }
    }
    if !run.resumed_lines.is_empty() {
        let lines: Vec<String> = run.resumed_lines.iter().map(u64::to_string).collect();
        out.push_str(&format!(
            "  {:<13} at line {}, placed in time by the `# resumed` stamps\n",
            "resumed",
            lines.join(", ")
        ));
    }
    let rows = span_rows(run, options).len();
    out.push_str(&format!(
        "  {:<13} {} ({:.0} s) from {:.0} s, {rows} {}\n",
        "span",
        format_clock(r.duration_s),
        r.duration_s,
        r.start_s,
        spacing_words(run.spacing)
    ));
    let settled = match r.settled_after_s {
        Some(s) => format!(
            "after {} ({s:.0} s) within ±{:.2} dB of {:+.2} dBm",
            format_clock(s),
            options.settle_tol_db,
            r.settled_dbm
        ),
        None => format!(
            "never: the last interval is more than ±{:.2} dB from {:+.2} dBm",
            options.settle_tol_db, r.settled_dbm
        ),
    };
    let stderr = r
        .drift_stderr_db_per_hour
        .map_or("(too few rows for a standard error)".into(), |s| {
            format!("± {s:.4} dB/h (standard error)")
        });
    let flags = if r.flagged_rows.is_empty() {
        "none".to_string()
    } else {
        r.flagged_rows
            .iter()
            .map(|(f, n)| format!("{f} {n}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let lines = [
        ("samples", r.samples.to_string()),
        ("mean power", mean_power(r)),
        ("uncertainty", mean_uncertainty(r)),
        (
            "min / max",
            format!(
                "{:+.3} / {:+.3} dBm (peak to peak {:.3} dB)",
                r.min_dbm, r.max_dbm, r.pk_pk_db
            ),
        ),
        (
            "spread",
            format!(
                "{:.3} dB, standard deviation of the interval means",
                r.std_db
            ),
        ),
        (
            "drift",
            format!(
                "{:+.4} dB/h {stderr}",
                r.drift_db_per_hour.unwrap_or(f64::NAN)
            ),
        ),
        ("settled", settled),
        ("gaps", format!("{}, {:.1} s in all", r.gaps, r.gap_s)),
        ("flagged rows", flags),
    ];
    for (label, value) in lines {
        out.push_str(&format!("  {label:<13} {value}\n"));
    }
    out
}

/// The font embedded for bitmap plots (DejaVu Sans; see assets/fonts/DejaVuSans.COPYRIGHT).
const FONT: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

fn plot(
    path: &Path,
    size: (u32, u32),
    run: &Run,
    report: &Report,
    options: &ReportOptions,
) -> anyhow::Result<()> {
    let extension = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    let _ = plotters::style::register_font("sans-serif", FontStyle::Normal, FONT);
    let drawn = match extension.as_deref() {
        Some("svg") => draw(
            SVGBackend::new(path, size).into_drawing_area(),
            run,
            report,
            options,
        ),
        Some("png") => draw(
            BitMapBackend::new(path, size).into_drawing_area(),
            run,
            report,
            options,
        ),
        _ => {
            return Err(anyhow!(
                "cannot tell the plot format of {}: name it .svg or .png",
                path.display()
            ))
        }
    };
    drawn.with_context(|| format!("cannot draw the plot to {}", path.display()))
}

fn draw<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    run: &Run,
    report: &Report,
    options: &ReportOptions,
) -> anyhow::Result<()>
where
    DB::ErrorType: 'static,
{
    let fail = |e: DrawingAreaErrorKind<DB::ErrorType>| anyhow!("{e}");
    root.fill(&WHITE).map_err(fail)?;
    let rows = span_rows(run, options);
    let width = root.dim_in_pixel().0 as usize;
    let columns = decimate(&rows, width.saturating_sub(120).max(10));
    let (t0, t1) = (report.start_s, report.start_s + report.duration_s);
    let (unit, scale) = if report.duration_s > 3.0 * 3600.0 {
        ("h", 3600.0)
    } else if report.duration_s > 180.0 {
        ("min", 60.0)
    } else {
        ("s", 1.0)
    };
    let pad = (report.pk_pk_db * 0.08).max(0.05);
    let (y0, y1) = (report.min_dbm - pad, report.max_dbm + pad);
    let title = format!(
        "{} · {}",
        run.context_value("profile:").unwrap_or("dbtrail log"),
        run.context_value("started:")
            .map_or(String::new(), |s| format!("started {s}"))
    );
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 20))
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(70)
        .build_cartesian_2d(t0 / scale..t1 / scale, y0..y1)
        .map_err(fail)?;
    chart
        .configure_mesh()
        .x_desc(format!("time since start ({unit})"))
        .y_desc("power at the reference plane (dBm)")
        .draw()
        .map_err(fail)?;
    for (a, b) in &report.gap_spans {
        let shade = RGBColor(255, 200, 120).mix(0.45).filled();
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(a / scale, y0), (b / scale, y1)],
                shade,
            )))
            .map_err(fail)?;
    }
    let band = RGBColor(120, 160, 220);
    chart
        .draw_series(columns.iter().map(|&(t, lo, hi, _)| {
            PathElement::new(vec![(t / scale, lo), (t / scale, hi)], band.stroke_width(1))
        }))
        .map_err(fail)?
        .label("min–max of each interval")
        .legend(move |(x, y)| PathElement::new(vec![(x, y - 6), (x, y + 6)], band));
    chart
        .draw_series(LineSeries::new(
            columns.iter().map(|&(t, _, _, m)| (t / scale, m)),
            BLUE.stroke_width(1),
        ))
        .map_err(fail)?
        .label("interval mean (over watts)")
        .legend(|(x, y)| PathElement::new(vec![(x - 8, y), (x + 8, y)], BLUE));
    let drift = |t: f64| {
        report.drift_at_start_dbm + report.drift_db_per_hour.unwrap_or(0.0) * (t - t0) / 3600.0
    };
    chart
        .draw_series(LineSeries::new(
            [(t0 / scale, drift(t0)), (t1 / scale, drift(t1))],
            RED.stroke_width(2),
        ))
        .map_err(fail)?
        .label(format!(
            "drift {:+.3} dB/h",
            report.drift_db_per_hour.unwrap_or(f64::NAN)
        ))
        .legend(|(x, y)| PathElement::new(vec![(x - 8, y), (x + 8, y)], RED));
    if let Some(after) = report.settled_after_s {
        let t = (t0 + after) / scale;
        let green = RGBColor(0, 140, 60);
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(t, y0), (t, y1)],
                green.stroke_width(2),
            )))
            .map_err(fail)?
            .label(format!("settled after {}", format_clock(after)))
            .legend(move |(x, y)| PathElement::new(vec![(x, y - 6), (x, y + 6)], green));
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(fail)?;
    root.present().map_err(fail)?;
    Ok(())
}
