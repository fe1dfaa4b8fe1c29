//! The report's plot: the interval means against time with the fitted model, the drift
//! over the stretch it was fitted on and the warm-up shaded, and below it the Allan
//! deviation on log–log axes. Ticks fall on whole minutes or hours, the legend sits in a
//! strip of its own below the time panel, so it never covers data.

use std::path::Path;

use anyhow::{anyhow, Context};
use dbtrail::report::soak::SoakModel;
use dbtrail::report::{decimate, span_rows, LogRow, Report, ReportOptions, Run};
use dbtrail::stats::Bound;
use dbtrail::units::format_clock;
use plotters::chart::MeshStyle;
use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint};
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::text::human_duration;

// The colours are from the Okabe–Ito palette (M. Okabe and K. Ito, "Color Universal
// Design: how to make figures and presentations that are friendly to colorblind people",
// 2008), chosen so that readers with any common colour-vision deficiency can tell them
// apart; the greys are neutral additions for the frame, the grid and the gaps.
/// The interval means and the Allan deviation: Okabe–Ito blue.
const MEAN: RGBColor = RGBColor(0x00, 0x72, 0xB2);
/// The min–max band: Okabe–Ito sky blue.
const BAND: RGBColor = RGBColor(0x56, 0xB4, 0xE9);
/// The band is drawn see-through, so the mean line inside it stays clear.
const BAND_ALPHA: f64 = 0.55;
/// The fitted model: Okabe–Ito vermillion.
const MODEL: RGBColor = RGBColor(0xD5, 0x5E, 0x00);
/// The drift line: Okabe–Ito bluish green.
const DRIFT: RGBColor = RGBColor(0x00, 0x9E, 0x73);
/// The warm-up's shading: Okabe–Ito orange.
const WARMUP: RGBColor = RGBColor(0xE6, 0x9F, 0x00);
/// Rows whose figures are bounds, not values: Okabe–Ito reddish purple, a triangle
/// pointing the way the true figure may lie (up for at least, down for at most).
const BOUND_MARK: RGBColor = RGBColor(0xCC, 0x79, 0xA7);
/// The bound markers' half size, pixels.
const MARK_PX: i32 = 5;
/// Gaps: a neutral grey, since no data is there.
const GAP: RGBColor = RGBColor(0x99, 0x99, 0x99);
/// The plotting areas' background, a shade off white so the panels read as panels.
pub const PANEL: RGBColor = RGBColor(0xFA, 0xFA, 0xF7);
/// Grid lines: light, so the data stays in front.
const GRID: RGBColor = RGBColor(0xE4, 0xE4, 0xE0);
/// Axes and text.
const INK: RGBColor = RGBColor(0x33, 0x33, 0x33);

/// Room right of the plotting areas, so a tick label at their right end is never cut.
const RIGHT_MARGIN: u32 = 30;
const Y_LABEL_AREA: u32 = 72;
const X_LABEL_AREA: u32 = 44;
/// Below this height the Allan panel is left out: the time panel needs the room.
const ALLAN_MIN_HEIGHT: u32 = 420;
/// Tick labels are at least this far apart, pixels.
const TICK_SPACING_PX: f64 = 80.0;

/// The font embedded for bitmap plots (DejaVu Sans; see assets/fonts/DejaVuSans.COPYRIGHT).
const FONT: &[u8] = include_bytes!("../../../assets/fonts/DejaVuSans.ttf");

/// Draws `report` of `run` to `path`, SVG or PNG by its extension.
pub fn plot(
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

/// The title: a word that fits every log (a soak, an overload test, a quick check), the
/// frequency, then the profile's name and the start, from the log's
/// context lines.
pub fn title(run: &Run) -> String {
    let first_part = |key: &str| {
        run.context_value(key)
            .map(|v| v.split(';').next().unwrap_or(v).trim().to_string())
    };
    let frequency = first_part("frequency:").map_or("frequency not logged".into(), |f| f);
    let profile = first_part("profile:")
        .map(|p| p.split(" (").next().unwrap_or(&p).to_string())
        .unwrap_or_else(|| "dbtrail log".into());
    let started = run
        .context_value("started:")
        .map_or(String::new(), |s| format!(" · started {}", readable_utc(s)));
    format!("Power at {frequency} · {profile}{started}")
}

/// A start stamp as `record` writes it (`2026-12-02T21:05:35.858Z`) in plainer form,
/// `2026-12-02 21:05:35 UTC`; anything else as it stands.
fn readable_utc(stamp: &str) -> String {
    match stamp
        .trim()
        .strip_suffix('Z')
        .and_then(|s| s.split_once('T'))
    {
        Some((date, time)) => {
            let whole = time.split('.').next().unwrap_or(time);
            format!("{date} {whole} UTC")
        }
        None => stamp.to_string(),
    }
}

/// How the time axis counts: its unit's name and its length in seconds.
fn time_unit(duration_s: f64) -> (&'static str, f64) {
    if duration_s > 3.0 * 3600.0 {
        ("h", 3600.0)
    } else if duration_s > 180.0 {
        ("min", 60.0)
    } else {
        ("s", 1.0)
    }
}

/// Tick positions over `from..=to` at the smallest of `steps` that keeps at most `most`
/// ticks, and the decimals their labels need (none for whole steps).
fn ticks(from: f64, to: f64, steps: &[f64], most: usize) -> (Vec<f64>, usize) {
    let fits = |step: f64| (((to - from) / step).floor() as usize) < most.max(2);
    let step = steps
        .iter()
        .copied()
        .find(|&s| fits(s))
        .unwrap_or(steps[steps.len() - 1]);
    let first = (from / step - 1e-9).ceil() as i64;
    let last = (to / step + 1e-9).floor() as i64;
    let points = (first..=last).map(|k| k as f64 * step).collect();
    (points, decimals_of(step))
}

/// Decimals a step's multiples need: 0 for whole steps, 1 for 0.5, 2 for 0.05 …
fn decimals_of(step: f64) -> usize {
    (0..6)
        .find(|&d| {
            let scaled = step * 10f64.powi(d);
            (scaled - scaled.round()).abs() < 1e-6
        })
        .unwrap_or(6) as usize
}

/// Steps of 1, 2 and 5 in each decade from 10⁻³ to 10⁶.
fn decade_steps() -> Vec<f64> {
    (-3..=6)
        .flat_map(|e| [1.0, 2.0, 5.0].map(|m| m * 10f64.powi(e)))
        .collect()
}

/// Whole-unit steps for the time axis.
fn time_steps(unit: &str) -> &'static [f64] {
    match unit {
        "h" => &[
            1.0, 2.0, 3.0, 6.0, 12.0, 24.0, 48.0, 96.0, 168.0, 336.0, 720.0,
        ],
        _ => &[
            1.0, 2.0, 5.0, 10.0, 15.0, 20.0, 30.0, 60.0, 120.0, 300.0, 600.0,
        ],
    }
}

/// Time ticks in whole units when at least three fit the span, else in fractions of
/// one for a span that short.
fn time_ticks(from: f64, to: f64, unit: &str, most: usize) -> (Vec<f64>, usize) {
    let whole = ticks(from, to, time_steps(unit), most);
    if whole.0.len() >= 3 {
        return whole;
    }
    let fractions: Vec<f64> = decade_steps().into_iter().filter(|s| *s < 1.0).collect();
    ticks(from, to, &fractions, most)
}

/// One legend entry's sample: a stroke of a line or a patch of a shading.
#[derive(Clone, Copy)]
enum Swatch {
    Line(RGBColor),
    Patch(RGBColor, f64),
    /// A bound marker: pointing up for at least, down for at most.
    Mark(Bound),
}

/// The legend's entries, in the order they are drawn.
fn legend_entries(run: &Run, report: &Report, options: &ReportOptions) -> Vec<(String, Swatch)> {
    let rows = span_rows(run, options);
    let model = match report.model {
        SoakModel::Line => "model: a straight line",
        SoakModel::Warmup => "model: warm-up on a drift",
    };
    let mut entries = vec![
        ("interval mean (over watts)".to_string(), Swatch::Line(MEAN)),
        (
            "min–max of each interval".to_string(),
            Swatch::Patch(BAND, BAND_ALPHA),
        ),
        (model.to_string(), Swatch::Line(MODEL)),
    ];
    if let Some(d) = report.drift_db_per_hour {
        let stretch = if report.drift_from_s > 0.0 {
            format!(" from {}", format_clock(report.drift_from_s))
        } else {
            String::new()
        };
        entries.push((format!("drift {d:+.3} dB/h{stretch}"), Swatch::Line(DRIFT)));
    }
    let settled = report.warmup_s.unwrap_or(0.0);
    if settled > 0.0 {
        entries.push((
            format!(
                "warm-up: within ±{:.2} dB after {}",
                options.settle_tol_db,
                format_clock(settled)
            ),
            Swatch::Patch(WARMUP, 0.25),
        ));
    }
    for (bound, label) in [
        (
            Bound::AtLeast,
            "row of at-least bounds (clip or above span)",
        ),
        (Bound::AtMost, "row of at-most bounds (below span)"),
        (Bound::Unknown, "row of bounds both ways"),
    ] {
        if rows
            .iter()
            .any(|r| r.mean_dbm.is_some() && r.bound == bound)
        {
            entries.push((label.to_string(), Swatch::Mark(bound)));
        }
    }
    if !report.gap_spans.is_empty() {
        entries.push(("gap (no rows)".to_string(), Swatch::Patch(GAP, 0.35)));
    }
    entries
}

/// A bound marker's outline around (0, 0), pixels: a triangle up for at least, down for
/// at most, a diamond for bounds both ways.
fn mark_outline(bound: Bound) -> Vec<(i32, i32)> {
    let m = MARK_PX;
    match bound {
        Bound::AtLeast => vec![(-m, m), (m, m), (0, -m)],
        Bound::AtMost => vec![(-m, -m), (m, -m), (0, m)],
        _ => vec![(0, -m), (m, 0), (0, m), (-m, 0)],
    }
}

/// A bound marker, filled, so it stands out on the band.
fn mark_shape(bound: Bound) -> Polygon<(i32, i32)> {
    Polygon::new(mark_outline(bound), BOUND_MARK.filled())
}

/// The bound rows' markers at their means, at most one per `width` seconds for each
/// kind, so a long log of bound rows stays readable.
fn bound_marks(rows: &[&LogRow], width: f64) -> Vec<(f64, f64, Bound)> {
    let mut marks: Vec<(f64, f64, Bound)> = Vec::new();
    for row in rows.iter().filter(|r| r.bound != Bound::Exact) {
        let Some(mean) = row.mean_dbm else { continue };
        let near = marks
            .iter()
            .rev()
            .take_while(|m| row.t - m.0 < width)
            .any(|m| m.2 == row.bound);
        if !near {
            marks.push((row.t, mean, row.bound));
        }
    }
    marks
}

const SWATCH_W: i32 = 24;
/// Legend font sizes to try, largest first; a legend that fits none is left out.
const LEGEND_FONTS: [u32; 2] = [14, 11];
/// The legend may take at most this share of the time panel's height.
const LEGEND_SHARE: f64 = 0.4;
/// Title font sizes to try, largest first, until the title fits the width.
const TITLE_FONTS: [u32; 4] = [20, 16, 13, 10];

/// A legend row's height for a font size.
fn legend_row(font: u32) -> i32 {
    font as i32 + 8
}

/// A legend laid out: its font size, each entry's place (x, row) and its height.
struct Legend {
    font: u32,
    places: Vec<(i32, i32)>,
    height: u32,
}

/// The legend's entries placed for the largest font whose rows fit in `room` pixels of
/// height; None when none fits.
fn fitted_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(String, Swatch)],
    left: i32,
    width: i32,
    room: f64,
) -> Option<Legend> {
    LEGEND_FONTS.into_iter().find_map(|font| {
        let places = legend_layout(area, entries, font, left, width);
        let rows = places.last().map_or(0, |p| p.1) + 1;
        let height = (rows * legend_row(font) + 6) as u32;
        (f64::from(height) <= room).then_some(Legend {
            font,
            places,
            height,
        })
    })
}

/// The title's font: the largest that fits `width`.
fn title_font<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, title: &str, width: u32) -> u32 {
    TITLE_FONTS
        .into_iter()
        .find(|&size| {
            let style: TextStyle = ("sans-serif", size).into();
            area.estimate_text_size(title, &style)
                .is_ok_and(|(w, _)| w + 16 <= width)
        })
        .unwrap_or(TITLE_FONTS[TITLE_FONTS.len() - 1])
}

/// Each entry's place in the legend strip, rows wrapped to `width`: (x, row).
fn legend_layout<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(String, Swatch)],
    font: u32,
    left: i32,
    width: i32,
) -> Vec<(i32, i32)> {
    let font: TextStyle = ("sans-serif", font).into();
    let (mut x, mut row) = (left, 0);
    entries
        .iter()
        .map(|(label, _)| {
            let text_w = area
                .estimate_text_size(label, &font)
                .map_or(label.chars().count() as i32 * 8, |(w, _)| w as i32);
            let entry_w = SWATCH_W + 6 + text_w + 22;
            if x > left && x + entry_w > left + width {
                (x, row) = (left, row + 1);
            }
            let place = (x, row);
            x += entry_w;
            place
        })
        .collect()
}

fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(String, Swatch)],
    size: u32,
    places: &[(i32, i32)],
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let font = ("sans-serif", size).into_font().color(&INK);
    for ((label, swatch), &(x, row)) in entries.iter().zip(places) {
        let y = row * legend_row(size) + legend_row(size) / 2 + 4;
        let (half, style) = match *swatch {
            Swatch::Line(c) => (1, c.filled()),
            Swatch::Patch(c, alpha) => (6, c.mix(alpha).filled()),
            Swatch::Mark(bound) => {
                let centre = (x + SWATCH_W / 2, y);
                area.draw(&(EmptyElement::at(centre) + mark_shape(bound)))?;
                (0, TRANSPARENT.filled())
            }
        };
        area.draw(&Rectangle::new(
            [(x, y - half), (x + SWATCH_W, y + half + 1)],
            style,
        ))?;
        area.draw(&Text::new(
            label.as_str(),
            (x + SWATCH_W + 6, y),
            font.pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
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
    let title = title(run);
    let size = title_font(&root, &title, root.dim_in_pixel().0);
    let body = root
        .titled(&title, ("sans-serif", size).into_font().color(&INK))
        .map_err(fail)?;
    let (width, height) = body.dim_in_pixel();
    let with_allan = !report.allan.is_empty() && root.dim_in_pixel().1 >= ALLAN_MIN_HEIGHT;
    let upper_h = if with_allan {
        (height as f64 * 0.62) as u32
    } else {
        height
    };
    let entries = legend_entries(run, report, options);
    let legend_left = if width >= 600 {
        12 + Y_LABEL_AREA as i32
    } else {
        8
    };
    let legend_width = width as i32 - legend_left - 8;
    let room = f64::from(upper_h) * LEGEND_SHARE;
    let legend = fitted_legend(&body, &entries, legend_left, legend_width, room);
    let legend_h = legend.as_ref().map_or(0, |l| l.height);
    let (upper, lower) = body.split_vertically(upper_h);
    let (time_area, legend_area) = upper.split_vertically(upper_h.saturating_sub(legend_h));
    draw_time_panel(&time_area, run, report, options).map_err(fail)?;
    if let Some(legend) = &legend {
        draw_legend(&legend_area, &entries, legend.font, &legend.places).map_err(fail)?;
    }
    if with_allan {
        draw_allan_panel(&lower, report).map_err(fail)?;
    }
    root.present().map_err(fail)?;
    Ok(())
}

/// What drawing on a backend gives.
type Drawn<T, DB> = Result<T, DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>>;

/// A panel's chart on `area` with room for its labels, `(top, bottom)` margins, and its
/// plotting area tinted.
fn panel<'a, DB: DrawingBackend, X: Ranged, Y: Ranged>(
    area: &'a DrawingArea<DB, Shift>,
    (top, bottom): (u32, u32),
    x: X,
    y: Y,
) -> Drawn<ChartContext<'a, DB, Cartesian2d<X, Y>>, DB> {
    let chart = ChartBuilder::on(area)
        .margin_top(top)
        .margin_bottom(bottom)
        .margin_left(12)
        .margin_right(RIGHT_MARGIN)
        .x_label_area_size(X_LABEL_AREA)
        .y_label_area_size(Y_LABEL_AREA)
        .build_cartesian_2d(x, y)?;
    chart.plotting_area().fill(&PANEL)?;
    Ok(chart)
}

/// The grid, axes and labels of every panel.
fn house_style<'m, 'a, 'b, X: Ranged, Y: Ranged, DB: DrawingBackend>(
    mesh: &'m mut MeshStyle<'a, 'b, X, Y, DB>,
) -> &'m mut MeshStyle<'a, 'b, X, Y, DB> {
    mesh.bold_line_style(GRID)
        .axis_style(INK)
        .label_style(label_font())
        .axis_desc_style(label_font())
}

fn label_font() -> TextStyle<'static> {
    ("sans-serif", 14).into_font().color(&INK)
}

/// The drift line's ends: the reported slope through the centroid of the interval means
/// it was fitted on (a least-squares line passes through it), from `drift_from_s` to the
/// span's end, in (seconds since the run started, dBm).
fn drift_ends(run: &Run, report: &Report, options: &ReportOptions) -> Option<[(f64, f64); 2]> {
    let slope = report.drift_db_per_hour? / 3600.0;
    let from = report.start_s + report.drift_from_s;
    let (n, sum_t, sum_m) = span_rows(run, options)
        .iter()
        .filter(|r| r.t >= from)
        .filter_map(|r| r.mean_dbm.map(|m| (r.t, m)))
        .fold((0.0, 0.0, 0.0), |(n, st, sm), (t, m)| {
            (n + 1.0, st + t, sm + m)
        });
    if n == 0.0 {
        return None;
    }
    let (t_mid, m_mid) = (sum_t / n, sum_m / n);
    let end = report.start_s + report.duration_s;
    let at = |t: f64| m_mid + slope * (t - t_mid);
    Some([(from, at(from)), (end, at(end))])
}

fn draw_time_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    run: &Run,
    report: &Report,
    options: &ReportOptions,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let (t0, t1) = (report.start_s, report.start_s + report.duration_s);
    let (unit, scale) = time_unit(report.duration_s);
    let plot_px = f64::from(area.dim_in_pixel().0.saturating_sub(Y_LABEL_AREA + 42));
    let (x_ticks, x_decimals) = time_ticks(
        t0 / scale,
        t1 / scale,
        unit,
        (plot_px / TICK_SPACING_PX) as usize,
    );
    let steps = 400;
    let model: Vec<(f64, f64)> = (0..=steps)
        .map(|i| {
            let since = report.duration_s * f64::from(i) / f64::from(steps);
            ((t0 + since) / scale, report.fit.at(since))
        })
        .collect();
    // The model may leave the readings' range (a line through a curve ends beyond it):
    // the axis holds both, so no drawn line runs along its edge.
    let (lo, hi) = model
        .iter()
        .map(|&(_, m)| m)
        .filter(|m| m.is_finite())
        .fold((report.min_dbm, report.max_dbm), |(lo, hi), m| {
            (lo.min(m), hi.max(m))
        });
    let pad = ((hi - lo) * 0.08).max(0.05);
    let (y0, y1) = (lo - pad, hi + pad);
    let plot_py = f64::from(area.dim_in_pixel().1.saturating_sub(X_LABEL_AREA + 10));
    let (y_ticks, y_decimals) = ticks(y0, y1, &decade_steps(), (plot_py / 30.0) as usize);
    let mut chart = panel(
        area,
        (8, 0),
        linear(t0 / scale, t1 / scale, x_ticks),
        linear(y0, y1, y_ticks),
    )?;
    house_style(&mut chart.configure_mesh())
        .x_label_formatter(&|v| format!("{v:.x_decimals$}"))
        .y_label_formatter(&|v| format!("{v:.y_decimals$}"))
        .x_desc(format!("time since the run started ({unit})"))
        .y_desc("power at the reference plane (dBm)")
        .draw()?;
    let shade = |from: f64, to: f64, colour: RGBColor, alpha: f64| {
        Rectangle::new(
            [(from / scale, y0), (to.min(t1) / scale, y1)],
            colour.mix(alpha).filled(),
        )
    };
    let settled = report.warmup_s.unwrap_or(0.0);
    if settled > 0.0 {
        chart.draw_series(std::iter::once(shade(t0, t0 + settled, WARMUP, 0.25)))?;
    }
    chart.draw_series(
        report
            .gap_spans
            .iter()
            .map(|&(a, b)| shade(a, b, GAP, 0.35)),
    )?;
    let rows = span_rows(run, options);
    let count = (plot_px as usize).max(10);
    let columns = decimate(&rows, count);
    let width = report.duration_s / count as f64;
    // Rows a little sparser than columns leave some columns empty: a step across one
    // is not a gap.
    let longest = run.spacing.longest_step_s() + 2.0 * width;
    for stretch in stretches(&columns, longest) {
        chart.draw_series(std::iter::once(Polygon::new(
            band_outline(stretch, width / 2.0, scale),
            BAND.mix(BAND_ALPHA).filled(),
        )))?;
    }
    chart.draw_series(LineSeries::new(model, MODEL.stroke_width(2)))?;
    for stretch in stretches(&columns, longest) {
        chart.draw_series(LineSeries::new(
            stretch.iter().map(|&(t, _, _, m)| (t / scale, m)),
            MEAN.stroke_width(1),
        ))?;
    }
    chart.draw_series(
        bound_marks(&rows, width)
            .into_iter()
            .map(|(t, m, bound)| EmptyElement::at((t / scale, m)) + mark_shape(bound)),
    )?;
    if let Some(ends) = drift_ends(run, report, options) {
        chart.draw_series(DashedLineSeries::new(
            ends.map(|(t, m)| (t / scale, m)),
            10,
            6,
            DRIFT.stroke_width(2),
        ))?;
    }
    Ok(())
}

/// A decimated column: (time, lowest, highest, mean).
type Column = (f64, f64, f64, f64);

/// The columns in stretches without a gap: a step longer than `longest` seconds starts a
/// new one, so neither the band nor the mean line bridges missing rows.
fn stretches(columns: &[Column], longest: f64) -> Vec<&[Column]> {
    let mut out = Vec::new();
    let mut start = 0;
    for i in 1..=columns.len() {
        if i == columns.len() || columns[i].0 - columns[i - 1].0 > longest {
            out.push(&columns[start..i]);
            start = i;
        }
    }
    out.retain(|s| !s.is_empty());
    out
}

/// The min–max band of a stretch as one outline: along the highs, back along the lows;
/// a lone column `half` seconds either side of its time.
fn band_outline(stretch: &[Column], half: f64, scale: f64) -> Vec<(f64, f64)> {
    let widened: Vec<Column> = match stretch {
        [(t, lo, hi, m)] => vec![(t - half, *lo, *hi, *m), (t + half, *lo, *hi, *m)],
        _ => stretch.to_vec(),
    };
    let highs = widened.iter().map(|&(t, _, hi, _)| (t / scale, hi));
    let lows = widened.iter().rev().map(|&(t, lo, _, _)| (t / scale, lo));
    highs.chain(lows).collect()
}

/// An axis whose ticks are the ones given, labelled by the mesh's formatter: plotters'
/// own key-point wrapper keeps the inner axis' formatting rule, which for `f64` asks for
/// a formatter the mesh cannot take.
struct Ticked<R: Ranged<ValueType = f64>> {
    inner: R,
    points: Vec<f64>,
}

impl<R: Ranged<ValueType = f64>> Ranged for Ticked<R> {
    type ValueType = f64;
    type FormatOption = DefaultFormatting;

    fn range(&self) -> std::ops::Range<f64> {
        self.inner.range()
    }

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        self.inner.map(value, limit)
    }

    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            Vec::new()
        } else {
            self.points.clone()
        }
    }
}

fn linear(from: f64, to: f64, points: Vec<f64>) -> Ticked<RangedCoordf64> {
    Ticked {
        inner: (from..to).into(),
        points,
    }
}

fn logarithmic(from: f64, to: f64, points: Vec<f64>) -> Ticked<LogCoord<f64>> {
    Ticked {
        inner: (from..to).log_scale().into(),
        points,
    }
}

/// Averaging-time ticks in round human units, from a millisecond to ten days.
const TAU_TICKS_S: [f64; 12] = [
    1e-3, 1e-2, 0.1, 1.0, 10.0, 60.0, 600.0, 3600.0, 36000.0, 86400.0, 864000.0, 8640000.0,
];

fn draw_allan_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    report: &Report,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let taus = report.allan.iter().map(|p| p.tau_s);
    let adevs = report.allan.iter().map(|p| p.adev_db.max(1e-9));
    let (tau_lo, tau_hi) = (
        taus.clone().fold(f64::INFINITY, f64::min),
        taus.fold(0.0, f64::max),
    );
    let (dev_lo, dev_hi) = (
        adevs.clone().fold(f64::INFINITY, f64::min),
        adevs.fold(0.0, f64::max),
    );
    let (x0, x1) = (tau_lo / 1.5, tau_hi * 1.5);
    let (y0, y1) = (dev_lo / 1.6, dev_hi * 1.6);
    let x_ticks: Vec<f64> = TAU_TICKS_S
        .into_iter()
        .filter(|t| (x0..=x1).contains(t))
        .collect();
    let y_ticks = log_ticks(y0, y1);
    let mut chart = panel(
        area,
        (14, 6),
        logarithmic(x0, x1, x_ticks),
        logarithmic(y0, y1, y_ticks),
    )?;
    house_style(&mut chart.configure_mesh())
        .x_label_formatter(&|v| human_duration(*v))
        .y_label_formatter(&|v| format!("{v:.*}", decimals_of(*v)))
        .x_desc("averaging time τ (Allan deviation of the interval means)")
        .y_desc("Allan deviation (dB)")
        .draw()?;
    let points: Vec<(f64, f64)> = report
        .allan
        .iter()
        .map(|p| (p.tau_s, p.adev_db.max(1e-9)))
        .collect();
    chart.draw_series(LineSeries::new(
        points.iter().copied(),
        MEAN.stroke_width(2),
    ))?;
    chart.draw_series(points.iter().map(|&p| Circle::new(p, 3, MEAN.filled())))?;
    Ok(())
}

/// Ticks for a log axis over `from..to`: each decade, and 2 and 5 times it when the
/// range spans fewer than three decades.
fn log_ticks(from: f64, to: f64) -> Vec<f64> {
    let (lo, hi) = (from.log10().floor() as i32, to.log10().ceil() as i32);
    let multiples: &[f64] = if to / from < 1e3 {
        &[1.0, 2.0, 5.0]
    } else {
        &[1.0]
    };
    (lo..=hi)
        .flat_map(|e| multiples.iter().map(move |m| m * 10f64.powi(e)))
        .filter(|v| (from..=to).contains(v))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::super::sample::warm_run;
    use super::*;

    fn svg_of(run: &Run, report: &Report, size: (u32, u32)) -> String {
        let _ = plotters::style::register_font("sans-serif", FontStyle::Normal, FONT);
        let mut svg = String::new();
        draw(
            SVGBackend::with_string(&mut svg, size).into_drawing_area(),
            run,
            report,
            &ReportOptions::default(),
        )
        .unwrap();
        svg
    }

    /// The value of attribute `name` in one SVG tag.
    fn attribute<'a>(tag: &'a str, name: &str) -> Option<&'a str> {
        let start = tag.find(&format!(" {name}=\""))? + name.len() + 3;
        tag[start..].split('"').next()
    }

    fn number(tag: &str, name: &str) -> f64 {
        attribute(tag, name)
            .and_then(|v| v.parse().ok())
            .unwrap_or(f64::NAN)
    }

    /// Every text element: (x, y, font size, anchor, text).
    fn texts(svg: &str) -> Vec<(f64, f64, f64, String, String)> {
        svg.split("<text")
            .skip(1)
            .map(|chunk| {
                let (tag, rest) = chunk.split_once('>').unwrap();
                let text = rest.split("</text>").next().unwrap().trim().to_string();
                let anchor = attribute(tag, "text-anchor").unwrap_or("start").to_string();
                (
                    number(tag, "x"),
                    number(tag, "y"),
                    number(tag, "font-size"),
                    anchor,
                    text,
                )
            })
            .collect()
    }

    /// The plotting areas, found by their background: (left, top, right, bottom).
    fn panels(svg: &str) -> Vec<[f64; 4]> {
        let fill = format!("fill=\"#{:02X}{:02X}{:02X}\"", PANEL.0, PANEL.1, PANEL.2);
        svg.split("<rect")
            .skip(1)
            .filter(|tag| tag.split('>').next().unwrap().contains(&fill))
            .map(|tag| {
                let (x, y) = (number(tag, "x"), number(tag, "y"));
                [x, y, x + number(tag, "width"), y + number(tag, "height")]
            })
            .collect()
    }

    /// A text's horizontal extent, from its anchor and a generous width per character
    /// (DejaVu Sans averages about 0.6 em).
    fn extent(x: f64, size: f64, anchor: &str, text: &str) -> (f64, f64) {
        let width = 0.65 * size * text.chars().count() as f64;
        match anchor {
            "middle" => (x - width / 2.0, x + width / 2.0),
            "end" => (x - width, x),
            _ => (x, x + width),
        }
    }

    /// The y coordinates of every polyline drawn in `colour`.
    fn line_ys(svg: &str, colour: RGBColor) -> Vec<f64> {
        let stroke = format!(
            "stroke=\"#{:02X}{:02X}{:02X}\"",
            colour.0, colour.1, colour.2
        );
        svg.split("<polyline")
            .skip(1)
            .map(|chunk| chunk.split('>').next().unwrap())
            .filter(|tag| tag.contains(&stroke))
            .flat_map(|tag| {
                attribute(tag, "points")
                    .unwrap_or("")
                    .split_whitespace()
                    .filter_map(|p| p.split_once(',').and_then(|(_, y)| y.parse().ok()))
                    .collect::<Vec<f64>>()
            })
            .collect()
    }

    // Source: the rule in issue 15 item 6 (nothing drawn is cut): a model that leaves the
    // readings' range, as a straight line through a warm-up does at its ends, must still
    // lie inside the plotting area, not run along its edge.
    #[test]
    fn a_model_beyond_the_readings_stays_inside_the_panel() {
        let (run, mut report) = warm_run(1.0);
        report.fit.warmup = None;
        report.fit.level_dbm = report.min_dbm - 0.3;
        report.fit.slope_db_per_s = (report.max_dbm + 0.3 - report.fit.level_dbm) / 3600.0;
        let svg = svg_of(&run, &report, (800, 600));
        let [_, top, _, bottom] = panels(&svg)[0];
        let ys = line_ys(&svg, MODEL);
        assert!(ys.len() > 100, "{} points", ys.len());
        for y in ys {
            assert!(
                y > top + 1.0 && y < bottom - 1.0,
                "{y} against {top}..{bottom}"
            );
        }
    }

    // Source: the rules in issue 15 item 6: the frequency in the title, and no tick label
    // past the end of its axis or the picture.
    #[test]
    fn the_title_names_the_frequency_and_no_tick_label_is_cut() {
        for hours in [0.5, 3.0, 7.0] {
            let (run, report) = warm_run(hours);
            let (width, height) = (900, 640);
            let svg = svg_of(&run, &report, (width, height));
            let all = texts(&svg);
            assert!(
                all.iter().any(|t| t.4.starts_with("Power at 433.92MHz")),
                "{hours} h"
            );
            let areas = panels(&svg);
            assert_eq!(areas.len(), 2, "a time panel and an Allan panel");
            for [left, _, right, bottom] in areas {
                let ticks: Vec<_> = all
                    .iter()
                    .filter(|t| t.1 > bottom && t.1 < bottom + 25.0 && t.3 == "middle")
                    .collect();
                assert!(
                    ticks.len() >= 2,
                    "{hours} h: ticks under {bottom}: {ticks:?}"
                );
                for (x, _, size, anchor, text) in ticks {
                    let (from, to) = extent(*x, *size, anchor, text);
                    assert!(
                        (left - 0.5..=right + 0.5).contains(x)
                            && from >= 0.0
                            && to <= f64::from(width),
                        "{hours} h: tick `{text}` at {x} ({from}..{to}) beyond {left}..{right}"
                    );
                    assert!(
                        !text.contains('.'),
                        "{hours} h: tick `{text}` not in whole units"
                    );
                }
            }
        }
    }

    // Source: the rule in issue 15 item 6: a legend that never covers the data. Every
    // legend label lies wholly outside both plotting areas, at a small size too.
    #[test]
    fn the_legend_lies_outside_the_plotting_areas() {
        let (run, report) = warm_run(3.0);
        for size in [(1200, 700), (640, 480), (400, 300)] {
            let svg = svg_of(&run, &report, size);
            let areas = panels(&svg);
            let labels: Vec<String> = legend_entries(&run, &report, &ReportOptions::default())
                .into_iter()
                .map(|(label, _)| label)
                .collect();
            assert!(labels.iter().any(|l| l.starts_with("warm-up")));
            let placed: Vec<_> = texts(&svg)
                .into_iter()
                .filter(|t| labels.contains(&t.4))
                .collect();
            assert_eq!(placed.len(), labels.len(), "{size:?}: every entry drawn");
            for (x, y, font, anchor, text) in placed {
                let (from, to) = extent(x, font, &anchor, &text);
                let (top, bottom) = (y - font, y + font);
                for [left, area_top, right, area_bottom] in &areas {
                    let overlaps =
                        from < *right && to > *left && top < *area_bottom && bottom > *area_top;
                    assert!(!overlaps, "{size:?}: `{text}` over a plotting area");
                }
                assert!(
                    to <= f64::from(size.0) && bottom <= f64::from(size.1),
                    "{size:?}: `{text}` cut"
                );
            }
        }
    }

    // Source: the PNG format's signature and IHDR layout (RFC 2083, sections 3.1 and
    // 4.1.1): a bitmap with both panels is drawn at the size asked for, large and at the
    // smallest --size allows.
    #[test]
    fn both_panels_draw_to_a_png_of_the_size_asked_for() {
        let (run, report) = warm_run(3.0);
        for size in [(1200, 700), (200, 150)] {
            let path = std::env::temp_dir().join(format!(
                "dbtrail-plot-{}-{}x{}.png",
                std::process::id(),
                size.0,
                size.1
            ));
            plot(&path, size, &run, &report, &ReportOptions::default()).unwrap();
            let bytes = std::fs::read(&path).unwrap();
            assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
            let width = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
            let height = u32::from_be_bytes(bytes[20..24].try_into().unwrap());
            assert_eq!((width, height), size);
            std::fs::remove_file(&path).unwrap();
        }
    }

    // Source: worked by hand: columns 10 s apart with one 60 s step, split where the step
    // passes 15 s (1.5 rows): two stretches of 3 and 2.
    #[test]
    fn gaps_split_the_band_and_the_mean_line() {
        let columns: Vec<Column> = [0.0, 10.0, 20.0, 80.0, 90.0]
            .map(|t| (t, 1.0, 2.0, 1.5))
            .to_vec();
        let parts = stretches(&columns, 15.0);
        assert_eq!(parts.iter().map(|p| p.len()).collect::<Vec<_>>(), [3, 2]);
        let outline = band_outline(parts[1], 5.0, 1.0);
        assert_eq!(
            outline,
            [(80.0, 2.0), (90.0, 2.0), (90.0, 1.0), (80.0, 1.0)]
        );
    }

    // Source: the rule in issue 15 item 6: the drift line only over the stretch it was
    // fitted on, from drift_from_s to the span's end.
    #[test]
    fn the_drift_line_starts_where_its_fit_does() {
        let (run, report) = warm_run(3.0);
        let [(from, _), (to, _)] = drift_ends(&run, &report, &ReportOptions::default()).unwrap();
        assert_eq!((from, to), (report.drift_from_s, report.duration_s));
    }

    // Source: the rule in issue 15 item 6: ticks in whole units as the span suits, the
    // last one inside the axis. A 3 h span in minutes with room for 7 ticks takes 30 min
    // steps (20 min would make 10): 0, 30 … 180, all whole.
    #[test]
    fn time_ticks_are_whole_and_end_inside_the_axis() {
        let (points, decimals) = time_ticks(0.0, 180.0, "min", 7);
        assert_eq!(points, [0.0, 30.0, 60.0, 90.0, 120.0, 150.0, 180.0]);
        assert_eq!(decimals, 0);
        let (late, _) = time_ticks(7.3, 171.9, "min", 7);
        assert_eq!(late.first(), Some(&30.0));
        assert_eq!(late.last(), Some(&150.0));
        assert!(late.iter().all(|t| (7.3..=171.9).contains(t)));
        // A 2 s span takes whole seconds, 0, 1 and 2, though halves would fit; a 0.6 s
        // span has no three whole seconds, so tenths.
        assert_eq!(time_ticks(0.0, 2.0, "s", 9), (vec![0.0, 1.0, 2.0], 0));
        let (short, decimals) = time_ticks(0.0, 0.6, "s", 9);
        assert_eq!((short.len(), decimals), (7, 1));
    }

    // Source: worked by hand: a 0.6 dB range with at most 7 ticks takes steps of 0.1
    // (0.05 would make 13), labelled with one decimal.
    #[test]
    fn level_ticks_take_the_decimals_their_step_needs() {
        let (points, decimals) = ticks(29.1, 29.7, &decade_steps(), 7);
        assert_eq!(points.len(), 7);
        assert_eq!(decimals, 1);
        assert!((points[0] - 29.1).abs() < 1e-9 && (points[6] - 29.7).abs() < 1e-9);
    }

    // Source: worked by hand: 0.0008 to 0.03 dB spans fewer than three decades, so 1, 2
    // and 5 of each decade inside it.
    #[test]
    fn log_ticks_add_two_and_five_over_a_short_range() {
        let got = log_ticks(0.0008, 0.03);
        let want = [0.001, 0.002, 0.005, 0.01, 0.02];
        assert_eq!(got.len(), want.len(), "{got:?}");
        assert!(got.iter().zip(want).all(|(g, w)| (g - w).abs() < 1e-12));
    }
}
