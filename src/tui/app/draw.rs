//! Drawing the live screen. Everything here only reads the [`App`].

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Clear, Paragraph, Widget, Wrap};
use ratatui::Frame;

use dbtrail::calibration::Flags;
use dbtrail::printable::{fields_to_keep, wrap_words};
use dbtrail::uncertainty::COVERAGE_K;
use dbtrail::units::{Power, Si, VoltageForm};

use super::board::fault_check;
use super::zero::ZERO_TAKE_S;
use super::{App, Mode, Plusminus, Shown, Units, View, TREND_WINDOWS, WARNING_HOLD_S};
use crate::tui::digits;
use crate::tui::line::LineEdit;

mod match_view;

/// The smallest screen that gets the large digits.
pub const FULL_SIZE: (u16, u16) = (80, 24);

/// Draws the whole screen.
pub fn draw(app: &App, frame: &mut Frame) {
    let area = frame.area();
    let full = area.width >= FULL_SIZE.0 && area.height >= FULL_SIZE.1;
    let reading_rows = if full { digits::HEIGHT + 1 } else { 1 };
    let hint_rows = if matches!(app.mode, Mode::Normal | Mode::Help) && app.notice.is_none() {
        key_hint_lines(app, usize::from(area.width)).len() as u16
    } else {
        1
    };
    // A refused answer too long for one row wraps onto a second rather than being cut.
    let status_rows = match &app.mode {
        Mode::Prompt {
            error: Some(error), ..
        } if error.chars().count() + 1 > usize::from(area.width) => 2,
        _ => 1,
    };
    // The board's line takes the blank row under the other forms.
    let board_rows = u16::from(full || app.board.is_some());
    let [title, banner, reading, forms, board, bar, markers, holds, peak, _, trend, status, hints] =
        Layout::vertical([
            Constraint::Length(1),
            Constraint::Length(1),
            Constraint::Length(reading_rows),
            Constraint::Length(1),
            Constraint::Length(board_rows),
            Constraint::Length(1),
            Constraint::Length(1),
            Constraint::Length(1),
            Constraint::Length(1),
            Constraint::Length(u16::from(full)),
            Constraint::Min(0),
            Constraint::Length(status_rows),
            Constraint::Length(hint_rows),
        ])
        .areas(area);
    let buf = frame.buffer_mut();
    warning_banner(app, banner, buf);
    match app.coupled.as_ref().filter(|_| app.view == View::Matching) {
        Some(run) => {
            let rows = match_view::Rows {
                title,
                reading,
                powers: forms,
                bar,
                markers,
                range: holds,
                best: peak,
                trend,
            };
            match_view::draw(app, run, &rows, full, buf);
        }
        None => {
            title_bar(app, title, buf);
            main_reading(app, reading, full, buf);
            Paragraph::new(other_forms(app)).render(forms, buf);
            if let Some(line) = board_line(app) {
                Paragraph::new(line).render(board, buf);
            }
            level_bar(app, bar, markers, buf);
            Paragraph::new(holds_line(app)).render(holds, buf);
            Paragraph::new(peak_line(app)).render(peak, buf);
            trend_chart(app, trend, buf);
        }
    }
    match &app.mode {
        Mode::Prompt {
            error: Some(error), ..
        } => Paragraph::new(format!(" {error}"))
            .wrap(Wrap { trim: false })
            .style(paint(app, Color::Red, None).add_modifier(Modifier::BOLD))
            .render(status, buf),
        _ => Paragraph::new(status_line(app, usize::from(status.width))).render(status, buf),
    }
    let cursor = bottom_line(app, hints, buf);
    if app.mode == Mode::Help {
        help_overlay(app, area, buf);
    }
    if let Some(cursor) = cursor {
        frame.set_cursor_position(cursor);
    }
}

/// A style with a colour, or without when colours are off (`NO_COLOR`).
fn paint(app: &App, fg: Color, bg: Option<Color>) -> Style {
    if !app.color {
        return Style::new();
    }
    let style = Style::new().fg(fg);
    bg.map_or(style, |bg| style.bg(bg))
}

/// The style of readings: greyed while the source is disconnected.
fn reading_style(app: &App) -> Style {
    if app.connected {
        Style::new().add_modifier(Modifier::BOLD)
    } else {
        paint(app, Color::DarkGray, None).add_modifier(Modifier::DIM)
    }
}

fn title_bar(app: &App, area: Rect, buf: &mut Buffer) {
    let cal = &app.cal;
    let text = format!(
        " dbtrail · {} · {} ({:+.2} dB) · offset {:+.2} dB · avg {}",
        dbtrail::printable::escape_controls(&app.profile.name),
        Si::new(cal.freq_hz(), "Hz"),
        cal.correction_db(),
        cal.offset_db(),
        app.averager.mode().describe(),
    );
    Paragraph::new(text)
        .style(Style::new().add_modifier(Modifier::REVERSED))
        .render(area, buf);
}

/// How much a line on the warning line matters, which sets its style and mark.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Weight {
    /// Something is or may be harmed, or the reading is wrong: bold on red.
    Alarm,
    /// The reading is to be taken with care: on yellow.
    Caution,
    /// How the source stands (a finished replay): calm, no mark.
    State,
}

/// One warning in a long and a short form.
struct Warning {
    long: &'static str,
    short: &'static str,
    weight: Weight,
}

const fn warning(long: &'static str, short: &'static str, weight: Weight) -> Warning {
    Warning {
        long,
        short,
        weight,
    }
}

/// The mark before an alarm or a caution. The hold marks on the level bar are others.
const WARNING_MARK: &str = "!";

/// The warnings of the flags, most serious first.
const FLAG_WARNINGS: [(Flags, Warning); 5] = [
    (
        Flags::OVER_RATED,
        warning("OVER LOAD/ATTENUATOR RATING", "OVER RATING", Weight::Alarm),
    ),
    (
        Flags::OVER_DETECTOR_MAX,
        warning("OVER DETECTOR SAFE INPUT", "OVER SAFE INPUT", Weight::Alarm),
    ),
    (Flags::ADC_CLIP, warning("ADC CLIP", "CLIP", Weight::Alarm)),
    (
        Flags::OVER_FULL_SCALE,
        warning(
            "COUNTS OVER ADC FULL SCALE",
            "OVER FULL SCALE",
            Weight::Alarm,
        ),
    ),
    (
        Flags::ABOVE_SPAN,
        warning("ABOVE CALIBRATED SPAN", "ABOVE SPAN", Weight::Alarm),
    ),
];

/// The warnings up now, in the order they are shown: how the source stands, then by
/// seriousness.
fn warnings_now(app: &App) -> Vec<&'static Warning> {
    const ENDED: Warning = warning(
        "END OF REPLAY: last reading greyed",
        "REPLAY ENDED",
        Weight::State,
    );
    const DISCONNECTED: Warning = warning(
        "SOURCE DISCONNECTED: retrying; last reading greyed",
        "DISCONNECTED",
        Weight::Caution,
    );
    const REJECTING: Warning = warning(
        "INPUT REJECTED: check format, channel count, baud rate",
        "INPUT REJECTED",
        Weight::Caution,
    );
    const OFF_TABLE: Warning = warning(
        "FREQUENCY OUTSIDE THE CORRECTION TABLE: its end value used",
        "FREQ OFF TABLE",
        Weight::Caution,
    );
    const HIGH_SWR: Warning = warning(
        "HIGH SWR: past the transmitter's limit",
        "HIGH SWR",
        Weight::Alarm,
    );
    const HIGH_REFLECTED: Warning = warning(
        "HIGH REFLECTED POWER: past the transmitter's limit",
        "HIGH REFLECTED",
        Weight::Alarm,
    );
    let mut list = Vec::new();
    if app.ended {
        list.push(&ENDED);
    } else if !app.connected {
        list.push(&DISCONNECTED);
    }
    // The transmitter's limits first: they protect what drives the line.
    let over = app.over_limits();
    if over.swr {
        list.push(&HIGH_SWR);
    }
    if over.reflected {
        list.push(&HIGH_REFLECTED);
    }
    let active = app.active_warnings();
    list.extend(
        FLAG_WARNINGS
            .iter()
            .filter(|(f, _)| active.contains(*f))
            .map(|(_, w)| w),
    );
    if app.is_rejecting() {
        list.push(&REJECTING);
    }
    list.extend(board_warnings(app));
    let reflected_off_table = app.coupled.as_ref().is_some_and(|run| {
        let flags = run.cal.reflected.fixed_flags();
        flags.contains(Flags::FREQ_OUTSIDE)
    });
    if app.cal.fixed_flags().contains(Flags::FREQ_OUTSIDE) || reflected_off_table {
        list.push(&OFF_TABLE);
    }
    list
}

/// The board's warnings: its sensor's fault, a temperature outside the calibrated ones,
/// or one not known while samples come.
fn board_warnings(app: &App) -> Option<&'static Warning> {
    const FAULT: Warning = warning(
        "TEMPERATURE SENSOR FAULT: see the board line",
        "SENSOR FAULT",
        Weight::Caution,
    );
    const OUTSIDE: Warning = warning(
        "BOARD OUTSIDE CALIBRATED TEMPERATURES",
        "BOARD TEMP OUT",
        Weight::Caution,
    );
    const UNKNOWN: Warning = warning("BOARD TEMPERATURE UNKNOWN", "TEMP UNKNOWN", Weight::Caution);
    let board = app.board.as_ref()?;
    if board.fault(app.now, WARNING_HOLD_S).is_some() {
        Some(&FAULT)
    } else if board.is_outside() {
        Some(&OUTSIDE)
    } else if board.kelvin().is_none() && app.last_sample_t.is_some() {
        Some(&UNKNOWN)
    } else {
        None
    }
}

/// The text of each warning as shown in `width` cells: long forms while they all fit,
/// then short ones from the least serious up, then the least serious left out whole and
/// counted. Never a warning cut part-way.
fn fit_warnings(warnings: &[&Warning], width: usize) -> (Vec<String>, usize) {
    let text = |w: &Warning, long: bool| {
        let words = if long { w.long } else { w.short };
        match w.weight {
            Weight::State => words.to_string(),
            _ => format!("{WARNING_MARK} {words}"),
        }
    };
    // Each part has a cell of padding either side and one between it and the next.
    let cells = |parts: &[String], left_out: usize| {
        let more = if left_out > 0 {
            format!(" +{left_out} more").len()
        } else {
            0
        };
        parts.iter().map(|p| p.chars().count() + 3).sum::<usize>() + more - 1
    };
    let n = warnings.len();
    for shown in (1..=n).rev() {
        for short_from in (0..=shown).rev() {
            let parts: Vec<String> = warnings[..shown]
                .iter()
                .enumerate()
                .map(|(i, w)| text(w, i < short_from))
                .collect();
            if cells(&parts, n - shown) <= width {
                return (parts, n - shown);
            }
        }
    }
    (Vec::new(), n)
}

fn weight_style(app: &App, weight: Weight) -> Style {
    if !app.color {
        return match weight {
            Weight::Alarm => Style::new().add_modifier(Modifier::BOLD | Modifier::REVERSED),
            Weight::Caution => Style::new().add_modifier(Modifier::BOLD),
            Weight::State => Style::new(),
        };
    }
    match weight {
        Weight::Alarm => Style::new()
            .fg(Color::White)
            .bg(Color::Red)
            .add_modifier(Modifier::BOLD),
        Weight::Caution => Style::new().fg(Color::Black).bg(Color::Yellow),
        Weight::State => Style::new().fg(Color::Cyan),
    }
}

fn warning_banner(app: &App, area: Rect, buf: &mut Buffer) {
    let warnings = warnings_now(app);
    let (parts, left_out) = fit_warnings(&warnings, usize::from(area.width));
    let mut spans = Vec::new();
    for (i, (part, warning)) in parts.into_iter().zip(&warnings).enumerate() {
        if i > 0 {
            spans.push(Span::raw(" "));
        }
        spans.push(Span::styled(
            format!(" {part} "),
            weight_style(app, warning.weight),
        ));
    }
    if left_out > 0 {
        spans.push(Span::raw(format!(" +{left_out} more")));
    }
    Paragraph::new(Line::from(spans)).render(area, buf);
}

/// The number and unit of the main reading in the chosen units, or a phrase.
pub fn main_text(app: &App) -> (String, String) {
    match app.shown() {
        Shown::Waiting => (String::new(), "waiting for samples".into()),
        Shown::Below(lo) => (String::new(), format!("below {lo:+.2} dBm")),
        Shown::AtLeast(at, why) => (
            String::new(),
            format!("at least {at:+.2} dBm ({})", why.reason()),
        ),
        Shown::Level(dbm) => in_units(app, dbm, app.units),
    }
}

fn in_units(app: &App, dbm: f64, units: Units) -> (String, String) {
    let ohms = app.profile.ohms;
    let power = Power::from_dbm(dbm);
    let si = |value: f64, unit: &'static str| {
        let text = Si::new(value, unit).to_string();
        let (number, unit) = text.split_once(' ').unwrap_or((&text, ""));
        (number.to_string(), unit.to_string())
    };
    let volts = |form: VoltageForm, suffix: &str| {
        let (n, u) = si(power.volts(ohms, form), "V");
        (n, format!("{u}{suffix}"))
    };
    match units {
        Units::Dbm => (format!("{dbm:+.2}"), "dBm".into()),
        Units::Watts => si(power.watts(), "W"),
        Units::Vrms => volts(VoltageForm::Rms, "rms"),
        Units::Vpk => volts(VoltageForm::Peak, "pk"),
        Units::Vpp => volts(VoltageForm::PeakToPeak, "pp"),
        Units::Relative => match app.reference_dbm {
            Some(reference) => (format!("{:+.2}", dbm - reference), "dB rel".into()),
            None => (format!("{dbm:+.2}"), "dBm".into()),
        },
    }
}

/// `value` rounded up at `decimals` places: a shown uncertainty never claims less than
/// its budget (a figure under the last digit shows as one of it, never as zero). A
/// sliver under one ten-millionth of the digit is taken as floating-point error.
pub fn round_up(value: f64, decimals: usize) -> f64 {
    let scale = 10f64.powi(decimals as i32);
    (value * scale - 1e-7).ceil().max(0.0) / scale
}

/// An expanded uncertainty in dB as the screen shows it, rounded up to 0.01 dB.
pub fn plusminus_db(u_db: f64) -> String {
    format!("±{:.2} dB", round_up(u_db, 2))
}

/// An expanded uncertainty in dB as a percentage of a power (`per_decade` 10) or a
/// voltage (20): the wider of its two sides, 10^(U/per_decade) − 1, since +U dB is more
/// per cent than −U dB. It is worked from the dB figure as [`plusminus_db`] shows it
/// (rounded up), so the pair on the screen agree, and rounded up to two significant
/// digits (one from 10 %).
pub fn plusminus_percent(u_db: f64, per_decade: f64) -> String {
    let shown_db = round_up(u_db, 2);
    let percent = (10f64.powf(shown_db / per_decade) - 1.0) * 100.0;
    let digits_for = |p: f64| {
        if p < 1.0 {
            2
        } else if p < 10.0 {
            1
        } else {
            0
        }
    };
    // Rounding up can carry into the next decade (9.95 % to 10.0 %), which takes one
    // digit fewer.
    let digits = digits_for(round_up(percent, digits_for(percent)));
    format!("±{:.digits$} %", round_up(percent, digits))
}

/// What the screen says about the main reading's uncertainty.
#[derive(Debug, Default)]
struct Beside {
    /// The ± figure with its partial marker, or why there is none; empty while waiting.
    figure: String,
    /// What the figure is.
    about: String,
    /// The terms the budget left out.
    left_out: Vec<&'static str>,
}

fn beside(app: &App) -> Beside {
    let marker = |text: &str| Beside {
        figure: text.into(),
        ..Beside::default()
    };
    let budget = match app.plusminus() {
        Plusminus::Waiting => return Beside::default(),
        Plusminus::Bound => return marker("· a bound, no ±"),
        Plusminus::OverFullScale => return marker("no ±: counts over ADC full scale"),
        Plusminus::TempOutside => return marker("no ±: board outside its calibrated temperatures"),
        Plusminus::TempUnknown => return marker("no ±: board temperature unknown"),
        Plusminus::Budget(budget) => budget,
    };
    let u_db = budget.expanded_db();
    let coverage = format!("k = {COVERAGE_K}, about 95 %");
    let (figure, about) = match app.units {
        Units::Relative => return marker("no ± in dB relative (? says why)"),
        Units::Dbm => (plusminus_db(u_db), coverage),
        Units::Watts => (
            plusminus_percent(u_db, 10.0),
            format!("{}, {coverage}", plusminus_db(u_db)),
        ),
        Units::Vrms | Units::Vpk | Units::Vpp => (
            plusminus_percent(u_db, 20.0),
            format!("{}, {coverage}", plusminus_db(u_db)),
        ),
    };
    let partial = if budget.missing.is_empty() {
        ""
    } else {
        " (partial)"
    };
    Beside {
        figure: format!("{figure}{partial}"),
        about,
        left_out: budget.missing.iter().map(|k| k.label()).collect(),
    }
}

/// `items` joined by spaces in lines of at most `width` characters, broken only between
/// items, the lines after the first starting with `indent`.
fn flow(items: &[String], indent: &str, width: usize) -> Vec<String> {
    let rest = width.saturating_sub(indent.chars().count());
    let mut lines = wrap_words(items.iter().map(String::as_str), width, rest);
    for line in lines.iter_mut().skip(1) {
        line.insert_str(0, indent);
    }
    lines
}

/// `head` and then `names`, comma-separated, `end` after the last, as items to flow.
fn listed(head: &str, names: &[&str], end: &str) -> Vec<String> {
    let mut items = vec![head.to_string()];
    for (i, name) in names.iter().enumerate() {
        let after = if i + 1 < names.len() { "," } else { end };
        items.push(format!("{name}{after}"));
    }
    items
}

/// The left-out terms in lines that fit `width` and `rows`, or their count and a pointer
/// to the help when they do not.
fn left_out_lines(left_out: &[&str], width: usize, rows: usize) -> Vec<String> {
    if left_out.is_empty() {
        return Vec::new();
    }
    let lines = flow(&listed("not in the ±:", left_out, ""), "", width);
    if lines.len() <= rows && lines.iter().all(|l| l.chars().count() <= width) {
        lines
    } else {
        vec![format!(
            "not in the ±: {} terms (? names them)",
            left_out.len()
        )]
    }
}

fn main_reading(app: &App, area: Rect, full: bool, buf: &mut Buffer) {
    let (number, unit) = main_text(app);
    let beside = beside(app);
    let style = reading_style(app);
    let style = match app.shown() {
        Shown::Below(_) | Shown::AtLeast(..) => style.patch(paint(app, Color::Yellow, None)),
        _ => style,
    };
    let frozen = if app.frozen.is_some() {
        "  [frozen]".to_string()
    } else if let Some(why) = no_new_samples(app) {
        // The last reading stands, but nothing says it would still be settled.
        format!("  ◌ {why}: the last reading")
    } else if !matches!(app.shown(), Shown::Level(_)) {
        // A bound is not a value that could settle.
        String::new()
    } else if app.is_settled() {
        "  ● settled".to_string()
    } else {
        "  ○ settling".to_string()
    };
    if !full || number.is_empty() {
        let figure = if beside.figure.is_empty() {
            String::new()
        } else {
            format!(" {}", beside.figure)
        };
        let mut text = format!(" {number} {unit}{figure}{frozen}");
        if number.is_empty() && text.chars().count() > usize::from(area.width) {
            // A bound's phrase says it is one; the reason matters more than the marker.
            text = format!(" {unit}{frozen}");
        }
        one_line_reading(&text, style, area, buf);
        return;
    }
    let width = digits::render(&number, area.x + 2, area.y, style, buf);
    let unit_row = Rect {
        x: area.x + 3 + width,
        y: area.y + digits::HEIGHT - 1,
        width: area.width.saturating_sub(3 + width),
        height: 1,
    };
    Paragraph::new(format!("{unit}{frozen}"))
        .style(style)
        .render(unit_row, buf);
    let side = Rect {
        y: area.y,
        height: digits::HEIGHT - 1,
        ..unit_row
    };
    beside_digits(app, &beside, side, buf);
}

/// A reading in one line of text, in the middle row of the room the large digits would
/// take: on a small screen, or for a phrase.
fn one_line_reading(text: &str, style: Style, area: Rect, buf: &mut Buffer) {
    let row = Rect {
        y: area.y + area.height.saturating_sub(1) / 2,
        height: 1,
        ..area
    };
    Paragraph::new(text.trim_end().to_string())
        .style(style)
        .render(row, buf);
}

/// Why no more samples come ("ended" for a finished replay, "no signal" while the
/// source is disconnected), or None while they flow.
fn no_new_samples(app: &App) -> Option<&'static str> {
    if app.ended {
        Some("ended")
    } else if !app.connected {
        Some("no signal")
    } else {
        None
    }
}

/// The ± and what it is on the top row beside the large digits, and the terms left out
/// on the rows under it.
fn beside_digits(app: &App, beside: &Beside, area: Rect, buf: &mut Buffer) {
    let rows = usize::from(area.height.saturating_sub(1));
    let about = if beside.about.is_empty() {
        String::new()
    } else {
        format!(" · {}", beside.about)
    };
    let mut lines = vec![Line::from(vec![
        Span::styled(beside.figure.clone(), reading_style(app)),
        Span::styled(about, paint(app, Color::Gray, None)),
    ])];
    lines.extend(
        left_out_lines(&beside.left_out, usize::from(area.width), rows)
            .into_iter()
            .map(|l| Line::styled(l, paint(app, Color::Gray, None))),
    );
    Paragraph::new(lines).render(area, buf);
}

/// The board's temperature and whether readings are compensated at it: None in a run
/// without a board.
fn board_line(app: &App) -> Option<Line<'static>> {
    let board = app.board.as_ref()?;
    let (lo, hi) = board.range_c();
    let caution = paint(app, Color::Yellow, None).add_modifier(Modifier::BOLD);
    let Some(kelvin) = board.kelvin() else {
        let text = match app.last_sample_t {
            None => "  board temperature: waiting for samples".to_string(),
            Some(_) => format!(
                "  {WARNING_MARK} board temperature unknown: read at the calibration's {:.2} °C",
                board.reference_c()
            ),
        };
        return Some(Line::styled(text, caution));
    };
    let shown = format!(
        "  board {:.2} °C   ",
        kelvin - dbtrail::units::CELSIUS_ZERO_K
    );
    let (note, style) = match board.fault(app.now, WARNING_HOLD_S) {
        Some(fault) => (
            format!(
                "{WARNING_MARK} {}: {}",
                fault.short_name(),
                fault_check(fault)
            ),
            caution,
        ),
        None if board.is_outside() => (
            format!("{WARNING_MARK} outside the calibrated {lo:.2} to {hi:.2} °C: no ±"),
            caution,
        ),
        None => (
            format!("compensated; calibrated {lo:.2} to {hi:.2} °C"),
            paint(app, Color::Gray, None),
        ),
    };
    Some(Line::from(vec![
        Span::raw(shown),
        Span::styled(note, style),
    ]))
}

fn other_forms(app: &App) -> Line<'static> {
    let Shown::Level(dbm) = app.shown() else {
        return Line::from("");
    };
    let mut parts: Vec<String> = [
        Units::Dbm,
        Units::Watts,
        Units::Vrms,
        Units::Vpk,
        Units::Vpp,
    ]
    .into_iter()
    .filter(|u| *u != app.units)
    .map(|u| {
        let (n, unit) = in_units(app, dbm, u);
        format!("{n} {unit}")
    })
    .collect();
    if let (Some(reference), false) = (app.reference_dbm, app.units == Units::Relative) {
        parts.push(format!("Δref {:+.2} dB", dbm - reference));
    }
    Line::from(format!(
        "  {}   at {} Ω",
        parts.join(" · "),
        app.profile.ohms
    ))
}

/// Column of `dbm` on a bar of `width` cells spanning `span`.
fn bar_position(dbm: f64, span: (f64, f64), width: u16) -> f64 {
    let fraction = ((dbm - span.0) / (span.1 - span.0)).clamp(0.0, 1.0);
    fraction * f64::from(width)
}

fn level_bar(app: &App, bar: Rect, markers: Rect, buf: &mut Buffer) {
    let span = app.cal.span_dbm();
    let left = format!(" {:+.1} ", span.0);
    let right = format!(" {:+.1} dBm", span.1);
    let width = bar.width.saturating_sub((left.len() + right.len()) as u16);
    if width < 4 {
        return;
    }
    let x0 = bar.x + left.len() as u16;
    buf.set_string(bar.x, bar.y, &left, Style::new());
    buf.set_string(x0 + width, bar.y, &right, Style::new());
    let level = match app.shown() {
        Shown::Level(v) | Shown::AtLeast(v, _) => Some(v),
        Shown::Below(_) | Shown::Waiting => None,
    };
    let fill = level.map_or(0.0, |v| bar_position(v, span, width));
    let style = reading_style(app).patch(paint(app, Color::Green, None));
    for i in 0..width {
        let covered = (fill - f64::from(i)).clamp(0.0, 1.0);
        let symbol = digits::eighths_left(covered);
        buf.set_string(
            x0 + i,
            bar.y,
            symbol,
            if symbol == "·" { Style::new() } else { style },
        );
    }
    let mut mark = |dbm: f64, symbol: &str| {
        let column = bar_position(dbm, span, width).min(f64::from(width) - 1.0) as u16;
        buf.set_string(
            x0 + column,
            markers.y,
            symbol,
            Style::new().add_modifier(Modifier::BOLD),
        );
    };
    if let Some((lo, hi)) = app.holds.extremes() {
        mark(lo, HOLD_MARK);
        mark(hi, HOLD_MARK);
    }
    if let Some(reference) = app.reference_dbm {
        mark(reference, "◆");
    }
}

/// The mark under the level bar at the min and max hold; warnings have their own.
const HOLD_MARK: &str = "┴";

fn holds_line(app: &App) -> String {
    let held = dbtrail::units::format_clock(app.now - app.holds_since);
    match app.holds.extremes() {
        Some((lo, hi)) => format!(
            "  hold   min {lo:+.2} dBm   max {hi:+.2} dBm   for {held}   (r resets; {HOLD_MARK} on the bar)"
        ),
        None => format!("  hold   no valid reading in {held}"),
    }
}

fn peak_line(app: &App) -> String {
    let (best, now) = match (app.best_dbm, app.shown()) {
        (Some(best), Shown::Level(now)) => (best, now),
        (Some(best), Shown::Below(_) | Shown::AtLeast(..)) => {
            return format!("  peak   best {best:+.2} dBm   now a bound, not compared");
        }
        _ => return "  peak   waiting for a valid reading".into(),
    };
    let direction = match (no_new_samples(app), app.change_over_last_second()) {
        (Some(why), _) => why.to_string(),
        (None, Some(d)) if d > 0.05 => format!("rising {d:+.2} dB/s"),
        (None, Some(d)) if d < -0.05 => format!("falling {d:+.2} dB/s"),
        (None, Some(_)) => "steady".into(),
        (None, None) => "…".into(),
    };
    let noise = app
        .spread
        .std_db()
        .map_or("σ …".into(), |sd| format!("σ {sd:.2} dB"));
    format!(
        "  peak   best {best:+.2} dBm ({noise})   now {:.2} dB below it   {direction}",
        best - now
    )
}

fn trend_chart(app: &App, area: Rect, buf: &mut Buffer) {
    let title = format!(
        " trend, last {} (t cycles) ",
        TREND_WINDOWS[app.trend_window].1
    );
    let chart = Chart {
        title,
        columns: &|n| app.trend_columns(n),
        label: |v| format!("{v:+7.2} "),
    };
    draw_chart(app, &chart, area, buf);
}

/// A trend to draw: its title, its columns of (min, max) for a width, and how an axis
/// value is labelled (eight cells at most).
struct Chart<'a> {
    title: String,
    columns: &'a dyn Fn(usize) -> Vec<Option<(f64, f64)>>,
    label: fn(f64) -> String,
}

fn draw_chart(app: &App, chart: &Chart, area: Rect, buf: &mut Buffer) {
    if area.height < 3 || area.width < 20 {
        return;
    }
    let block = Block::bordered().title(chart.title.clone());
    let inner = block.inner(area);
    block.render(area, buf);
    let axis = 9u16;
    let plot = Rect {
        x: inner.x + axis,
        width: inner.width.saturating_sub(axis),
        ..inner
    };
    let columns = (chart.columns)(usize::from(plot.width));
    let values = columns.iter().flatten();
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), (a, b)| {
        (lo.min(*a), hi.max(*b))
    });
    if !lo.is_finite() {
        buf.set_string(
            plot.x,
            inner.y,
            "no valid readings in this window yet",
            Style::new(),
        );
        return;
    }
    let (lo, hi) = if hi - lo < 0.2 {
        ((lo + hi) / 2.0 - 0.1, (lo + hi) / 2.0 + 0.1)
    } else {
        (lo, hi)
    };
    buf.set_string(inner.x, inner.y, (chart.label)(hi), Style::new());
    buf.set_string(
        inner.x,
        inner.y + inner.height - 1,
        (chart.label)(lo),
        Style::new(),
    );
    let style = reading_style(app).patch(paint(app, Color::Cyan, None));
    let eighths = f64::from(plot.height) * 8.0;
    for (i, column) in columns.iter().enumerate() {
        let Some((a, b)) = column else { continue };
        let bottom = ((a - lo) / (hi - lo) * eighths).floor().max(0.0) as u16;
        let top = ((b - lo) / (hi - lo) * eighths).ceil().max(1.0) as u16;
        // A column of one level on a cell's edge takes an eighth beside it, or no cell
        // would draw it: above, or below at the chart's top.
        let (bottom, top) = match top {
            t if t != bottom || t % 8 != 0 => (bottom, top),
            t if f64::from(t) >= eighths => (t - 1, t),
            t => (t, t + 1),
        };
        for row in 0..plot.height {
            let (cell_lo, cell_hi) = (row * 8, row * 8 + 8);
            if top <= cell_lo || bottom >= cell_hi {
                continue;
            }
            let symbol = if top < cell_hi {
                digits::eighths_up(top - cell_lo)
            } else {
                "█"
            };
            buf.set_string(
                plot.x + i as u16,
                plot.y + plot.height - 1 - row,
                symbol,
                style,
            );
        }
    }
}

fn status_line(app: &App, width: usize) -> Line<'static> {
    let state = if app.ended {
        Some(Span::styled("ENDED", paint(app, Color::Cyan, None)))
    } else if !app.connected {
        Some(Span::styled(
            "DISCONNECTED",
            paint(app, Color::Yellow, None).add_modifier(Modifier::BOLD),
        ))
    } else {
        None
    };
    let log = match &app.logging {
        Some((_, rows)) => format!("log on, {rows} rows"),
        None => "log off".into(),
    };
    // (priority, text): the lowest goes first when the line is too narrow.
    let mut fields: Vec<(u8, Span<'static>)> = Vec::new();
    if let Some(state) = state {
        fields.push((9, state));
    }
    fields.push((8, Span::raw(app.source.clone())));
    fields.push((4, Span::raw(format!("{:.0}/s", app.rate))));
    fields.push((6, Span::raw(app.link.brief())));
    if let Some(t) = app.last_sample_t {
        fields.push((3, Span::raw(format!("{:.1} s ago", (app.now - t).max(0.0)))));
    }
    fields.push((7, Span::raw(log)));
    if let Some(at) = &app.metrics_at {
        fields.push((5, Span::raw(at.clone())));
    }
    let widths: Vec<(u8, usize)> = fields.iter().map(|(p, s)| (*p, s.width())).collect();
    let kept = fields_to_keep(&widths, 3, width.saturating_sub(1));
    let mut spans = Vec::new();
    for (_, field) in fields
        .into_iter()
        .zip(kept)
        .filter(|(_, k)| *k)
        .map(|(f, _)| f)
    {
        spans.push(Span::raw(if spans.is_empty() { " " } else { " │ " }));
        spans.push(field);
    }
    Line::from(spans)
}

/// Where the prompt's cursor is, when a prompt is up.
fn bottom_line(app: &App, area: Rect, buf: &mut Buffer) -> Option<(u16, u16)> {
    match &app.mode {
        Mode::Prompt { ask, line, error } => Some(prompt_line(
            ask.question(),
            line,
            error.is_some(),
            area,
            buf,
        )),
        Mode::Zeroing(take) => {
            let text = format!(
                " ZERO: keep the RF OFF · {:.1} of {ZERO_TAKE_S:.0} s, {} samples · Esc cancels",
                take.collected_s().min(ZERO_TAKE_S),
                take.samples()
            );
            Paragraph::new(text)
                .style(paint(app, Color::Yellow, None).add_modifier(Modifier::BOLD))
                .render(area, buf);
            None
        }
        Mode::ConfirmQuit => {
            Paragraph::new(confirm_quit_text(app, usize::from(area.width)))
                .style(Style::new().add_modifier(Modifier::BOLD))
                .render(area, buf);
            None
        }
        _ => {
            let lines = match &app.notice {
                Some(notice) => vec![format!(" {notice}")],
                None => key_hint_lines(app, usize::from(area.width)),
            };
            Paragraph::new(lines.into_iter().map(Line::from).collect::<Vec<_>>())
                .style(paint(app, Color::Gray, None))
                .render(area, buf);
            None
        }
    }
}

/// The question a `q` puts while a log is open, in the longest form that fits `width`.
fn confirm_quit_text(app: &App, width: usize) -> String {
    let (path, rows) = app.logging.clone().unwrap_or_default();
    [
        format!(
            " a log is open ({rows} rows in {}): q again quits and closes it, any other key stays",
            path.display()
        ),
        format!(" a log is open ({rows} rows): q again quits and closes it, any other key stays"),
        " log open: q again quits, any other key stays".to_string(),
    ]
    .into_iter()
    .find(|text| text.chars().count() <= width)
    .unwrap_or_else(|| " q again quits".to_string())
}

/// The question, the answer so far with the cursor in view (a selected default shown
/// reversed), and what Enter and Esc do when there is room. Returns the cursor's cell.
fn prompt_line(
    question: &str,
    line: &LineEdit,
    refused: bool,
    area: Rect,
    buf: &mut Buffer,
) -> (u16, u16) {
    let question = format!(" {question}: ");
    let hint = if refused {
        "   fix it, or Esc cancels"
    } else {
        "   Enter applies · Esc cancels"
    };
    let width = usize::from(area.width);
    let asked = question.chars().count();
    let typed = line.text().chars().count() + 1;
    let hint = if asked + typed + hint.chars().count() <= width {
        hint
    } else {
        ""
    };
    let field = width.saturating_sub(asked + hint.chars().count()).max(1);
    let scroll = line.scroll(field);
    let shown: String = line.text().chars().skip(scroll).take(field).collect();
    let text_style = if line.is_selected() {
        Style::new().add_modifier(Modifier::REVERSED)
    } else {
        Style::new()
    };
    let spans = vec![
        Span::styled(question, Style::new().add_modifier(Modifier::BOLD)),
        Span::styled(shown, text_style),
        Span::raw(" "),
        Span::raw(hint),
    ];
    Paragraph::new(Line::from(spans)).render(area, buf);
    let column = (asked + line.cursor() - scroll).min(width.saturating_sub(1));
    (area.x + column as u16, area.y)
}

/// Every key, by priority: in one line when they all fit, else in two, else as many as
/// fit in two with the help key first (it lists the rest). Never a hint cut part-way.
fn key_hint_lines(app: &App, width: usize) -> Vec<String> {
    const HINTS: [&str; 11] = [
        "? help",
        "q quit",
        "f freq",
        "a avg",
        "u units",
        "l log",
        "space freeze",
        "t trend",
        "r reset",
        "o offset",
        "s/c ref",
    ];
    // A coupler run has no extra offset (its set-up file holds the arms' figures), and
    // has the matching view; in that view the units key picks SWR or return loss.
    let coupled = app.coupled.is_some();
    let matching = coupled && app.view == View::Matching;
    let hints = HINTS.iter().map(|&hint| match hint {
        "o offset" if matching => "m power",
        "o offset" if coupled => "m match",
        "u units" if matching => "u SWR/RL",
        other => other,
    });
    let mut lines = vec![String::new()];
    for hint in hints {
        let current = lines.last_mut().expect("one line at least");
        if current.chars().count() + hint.chars().count() + 3 <= width {
            current.push_str(if current.is_empty() { " " } else { " · " });
            current.push_str(hint);
        } else if lines.len() < 2 && hint.chars().count() < width {
            lines.push(format!(" {hint}"));
        } else {
            break;
        }
    }
    lines
}

/// The keys.
pub const HELP_KEYS: &[&str] = &[
    "f        set the frequency (e.g. 145.5MHz): applies its correction",
    "o        set an extra offset in dB (another attenuator, a coupler)",
    "a        averaging: off, a count (32) or a time (500ms, 2s), over watts",
    "u        cycle units: dBm, W, Vrms, Vpk, Vpp, dB relative",
    "t        cycle the trend window: 10 s, 1 min, 10 min, 1 h",
    "r        reset min/max hold and the peak",
    "s / c    set the reference to the reading / clear it   space  freeze",
    "l        start or stop logging to a CSV file (as `record` writes)",
    "z        zero the ADC with the RF OFF (2 s; RF present is refused)",
    "q        quit (asks first while a log is open)     Esc  cancel a prompt",
];

/// The line of the help for `m`, in a coupler run, in place of the offset's: there the
/// set-up file holds each arm's coupling and through-loss.
pub const MATCH_KEY_HELP: &str =
    "m        matching view and back; there u picks SWR or return loss";

/// The help's key lines for this run.
fn help_keys(app: &App) -> impl Iterator<Item = String> + Clone + '_ {
    HELP_KEYS.iter().map(|line| {
        if app.coupled.is_some() && line.starts_with("o ") {
            MATCH_KEY_HELP.to_string()
        } else {
            line.to_string()
        }
    })
}

/// The safety cautions in brief.
pub const SAFETY: &[&str] = &[
    "Safety: RF burns; keep clear of live antennas, feed lines and loads.",
    "Stay within the ratings of loads, attenuators and the detector.",
    "Transmit only as your licence and local regulations allow;",
    "local codes and licensed practice come first.",
];

/// Width of the help box at most.
const HELP_WIDTH: u16 = 76;
/// What the ± means when the help has no room for the whole of it.
const PLUSMINUS_SHORT: &str = "±        k = 2, about 95 %; its terms: this help at 80×24";

/// What the ± means, with the terms in it and left out of it now, in lines of `width`.
fn plusminus_help(app: &App, width: usize) -> Vec<String> {
    const INDENT: &str = "         ";
    let mut items = vec![
        format!("±        the true level lies within ± about 95 % of the time (k = {COVERAGE_K});"),
        "in W and V as a % (the wider side).".into(),
    ];
    match app.plusminus() {
        Plusminus::Budget(budget) => {
            let included: Vec<_> = budget.terms.iter().map(|t| t.kind.label()).collect();
            let missing: Vec<_> = budget.missing.iter().map(|k| k.label()).collect();
            items.extend(listed("In it:", &included, "."));
            if !missing.is_empty() {
                items.extend(listed("Not in it:", &missing, "."));
            }
        }
        _ => items.push("Its terms are named here while a reading has one.".into()),
    }
    let mut lines = flow(&items, INDENT, width);
    lines.push(format!(
        "{INDENT}None on a bound (below or above the span, at clip), nor in dB"
    ));
    lines.push(format!(
        "{INDENT}relative: a ratio of two readings has a budget of its own."
    ));
    lines
}

/// Rows `line` takes when wrapped between words at `width`.
fn wrapped_rows(line: &str, width: usize) -> usize {
    let words: Vec<String> = line.split(' ').map(String::from).collect();
    flow(&words, "", width.max(1)).len()
}

/// Rows the help's `lines` take in a box `width` wide (each after a one-space margin).
fn help_rows(lines: &[String], width: u16) -> usize {
    let inside = usize::from(width.saturating_sub(2));
    lines
        .iter()
        .map(|l| wrapped_rows(&format!(" {l}"), inside))
        .sum()
}

/// The help for a box of `width` × `height` cells: keys, the ±, the safety cautions. When
/// they do not all fit, the ± in one line; when even that does not, the safety cautions
/// first, so that they are never the part cut off.
fn help_lines(app: &App, width: u16, height: u16) -> Vec<String> {
    let fits = |lines: &[String]| help_rows(lines, width) + 2 <= usize::from(height);
    let keys = help_keys(app);
    let safety = SAFETY.iter().map(|l| l.to_string());
    let blank = || std::iter::once(String::new());
    // Inside the border, after the margin.
    let text_width = usize::from(width.saturating_sub(3));
    let full: Vec<String> = keys
        .clone()
        .chain(plusminus_help(app, text_width))
        .chain(blank())
        .chain(safety.clone())
        .collect();
    if fits(&full) {
        return full;
    }
    let short = || std::iter::once(PLUSMINUS_SHORT.to_string());
    let brief: Vec<String> = keys
        .clone()
        .chain(short())
        .chain(blank())
        .chain(safety.clone())
        .collect();
    if fits(&brief) {
        return brief;
    }
    safety.chain(blank()).chain(short()).chain(keys).collect()
}

fn help_overlay(app: &App, area: Rect, buf: &mut Buffer) {
    let width = HELP_WIDTH.min(area.width);
    let help = help_lines(app, width, area.height);
    let height = (help_rows(&help, width) as u16 + 2).min(area.height);
    let rect = Rect {
        x: area.x + (area.width - width) / 2,
        y: area.y + (area.height - height) / 2,
        width,
        height,
    };
    Clear.render(rect, buf);
    let lines: Vec<Line> = help.iter().map(|l| Line::from(format!(" {l}"))).collect();
    Paragraph::new(lines)
        .wrap(Wrap { trim: false })
        .block(
            Block::bordered()
                .title(" help · any key closes it ")
                .style(paint(app, Color::White, None)),
        )
        .render(rect, buf);
}
