//! The matching view of a coupler run: SWR or return loss in large digits, the powers it
//! comes from, what the coupler's directivity leaves open, the best match so far, a level
//! bar of return loss with the directivity marked, and the return loss's trend.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::Line;
use ratatui::widgets::{Paragraph, Widget, Wrap};

use dbtrail::matching::{return_loss_db, swr, MatchState};
use dbtrail::stats::{Bound, Figures};
use dbtrail::units::Si;

use super::{
    bar_position, draw_chart, no_new_samples, one_line_reading, paint, plusminus_db, reading_style,
    round_up, Chart, HOLD_MARK,
};
use crate::tui::app::coupled::{BigFigure, CoupledRun, MatchNow};
use crate::tui::app::{App, TREND_WINDOWS};
use crate::tui::digits;
use dbtrail::uncertainty::COVERAGE_K;

/// The rows of the screen the view fills, as the power view's layout gives them.
pub struct Rows {
    /// The title line.
    pub title: Rect,
    /// The large digits and what is beside them.
    pub reading: Rect,
    /// Forward, reflected and net power.
    pub powers: Rect,
    /// The level bar of return loss.
    pub bar: Rect,
    /// The marks under it.
    pub markers: Rect,
    /// The range the directivity leaves.
    pub range: Rect,
    /// The best match and how the present one compares.
    pub best: Rect,
    /// The trend of return loss.
    pub trend: Rect,
}

/// The mark on the return loss bar at the coupler's directivity.
const DIRECTIVITY_MARK: &str = "▲";

/// Draws the view in `rows`; `full` when there is room for the large digits.
pub fn draw(app: &App, run: &CoupledRun, rows: &Rows, full: bool, buf: &mut Buffer) {
    title_bar(app, run, rows.title, buf);
    let shown = run.shown();
    big_figure(app, run, shown, rows.reading, full, buf);
    Paragraph::new(powers_line(shown)).render(rows.powers, buf);
    return_loss_bar(app, run, shown, rows, buf);
    Paragraph::new(range_line(run, shown, usize::from(rows.range.width))).render(rows.range, buf);
    Paragraph::new(best_line(app, run, shown, usize::from(rows.best.width))).render(rows.best, buf);
    let title = format!(
        " return loss, last {} (t cycles) ",
        TREND_WINDOWS[app.trend_window].1
    );
    let chart = Chart {
        title,
        columns: &|n| run.trend_columns(app.trend_window, app.now, n),
        label: |v| format!("{v:7.2} "),
    };
    draw_chart(app, &chart, rows.trend, buf);
}

fn title_bar(app: &App, run: &CoupledRun, area: Rect, buf: &mut Buffer) {
    let cal = &run.cal;
    let hz = cal.forward.freq_hz();
    let text = format!(
        " dbtrail · {} · {} · directivity {:.1} dB · avg {}",
        dbtrail::printable::escape_controls(&run.coupler.setup.name),
        Si::new(hz, "Hz"),
        run.coupler.setup.directivity.at(hz).db,
        app.averager.mode().describe(),
    );
    Paragraph::new(text)
        .style(Style::new().add_modifier(Modifier::REVERSED))
        .render(area, buf);
}

/// SWR as the screen gives it: two decimals, fewer when it is large.
fn swr_text(value: f64) -> String {
    let decimals = swr_decimals(value);
    format!("{value:.decimals$}")
}

fn swr_decimals(value: f64) -> usize {
    match value {
        v if v >= 100.0 => 0,
        v if v >= 10.0 => 1,
        _ => 2,
    }
}

/// A bound rounded the way that keeps it true at `decimals` places: an upper one up, a
/// lower one down.
fn bound_text(sign: &str, value: f64, decimals: usize) -> String {
    let rounded = match sign {
        "≤" => round_up(value, decimals),
        "≥" => round_down(value, decimals),
        _ => value,
    };
    format!("{sign}{rounded:.decimals$}")
}

/// `value` (positive) rounded down at `decimals` places, a sliver over the digit taken as
/// floating-point error as [`round_up`] takes one under it.
fn round_down(value: f64, decimals: usize) -> f64 {
    let scale = 10f64.powi(decimals as i32);
    (value * scale + 1e-7).floor() / scale
}

/// SWR of a return loss in dB.
fn swr_of_db(db: f64) -> f64 {
    swr(10f64.powf(-db / 20.0))
}

/// What the large digits say: the sign of a bound ("≥", "≤" or none), the number, and
/// its unit; None when the match has no figure.
fn big_text(run: &CoupledRun, shown: &MatchNow) -> Option<(String, String)> {
    let interval = &shown.interval;
    let m = interval.figures?;
    // Return loss and the sign it has; SWR's sign is the other way round.
    let (rl, rl_sign) = match interval.state {
        MatchState::Value => (m.return_loss_db, ""),
        MatchState::ReturnLossAtLeast => (m.return_loss_db, "≥"),
        MatchState::ReturnLossAtMost => (m.return_loss_db, "≤"),
        // Within the coupler's leakage only the lower end of the true return loss is known.
        MatchState::Unresolved => (interval.return_loss_range_db?.0, "≥"),
        _ => return None,
    };
    if !rl.is_finite() {
        return None;
    }
    Some(match run.big {
        BigFigure::ReturnLoss => (bound_text(rl_sign, rl, 2), "dB return loss".into()),
        BigFigure::Swr => {
            let sign = match rl_sign {
                "≥" => "≤",
                "≤" => "≥",
                _ => "",
            };
            let value = if interval.state == MatchState::Value {
                m.swr
            } else {
                swr_of_db(rl)
            };
            (bound_text(sign, value, swr_decimals(value)), "SWR".into())
        }
    })
}

/// The figure the large digits do not show, with the ± of return loss or why there is
/// none.
fn other_figure(run: &CoupledRun, shown: &MatchNow) -> String {
    let interval = &shown.interval;
    let Some(m) = interval.figures else {
        return String::new();
    };
    let plusminus = match (interval.u_return_loss_db, interval.state) {
        (Some(u), _) => format!("{} · k = {COVERAGE_K}, about 95 %", plusminus_db(u)),
        (None, MatchState::Value) => "(no ±: too few samples in the window for their noise)".into(),
        (None, _) => return "a bound, no ±".into(),
    };
    match run.big {
        BigFigure::Swr => format!("return loss {:.2} dB {plusminus}", m.return_loss_db),
        BigFigure::ReturnLoss => format!("SWR {} · return loss {plusminus}", swr_text(m.swr)),
    }
}

/// What the match is, in plain words, beside or under the figure.
fn state_words(shown: Option<&MatchNow>) -> &'static str {
    match shown {
        None => "waiting for samples of both arms",
        Some(s) => s.interval.state.words(),
    }
}

fn big_figure(
    app: &App,
    run: &CoupledRun,
    shown: Option<&MatchNow>,
    area: Rect,
    full: bool,
    buf: &mut Buffer,
) {
    let big = shown.and_then(|s| big_text(run, s));
    let bound = shown.is_some_and(|s| s.interval.state != MatchState::Value);
    let style = if bound {
        reading_style(app).patch(paint(app, Color::Yellow, None))
    } else {
        reading_style(app)
    };
    let marker = marker(app, run);
    let other = shown.map(|s| other_figure(run, s)).unwrap_or_default();
    let words = state_words(shown);
    let Some((number, unit)) = big.clone().filter(|_| full) else {
        let figure = big.map(|(n, u)| format!("{n} {u} · ")).unwrap_or_default();
        let text = format!(" {figure}{other} {words}{marker}");
        one_line_reading(&text, style, area, buf);
        return;
    };
    let width = digits::render(&number, area.x + 2, area.y, style, buf);
    let side = Rect {
        x: area.x + 3 + width,
        width: area.width.saturating_sub(3 + width),
        ..area
    };
    let figures = shown.and_then(|s| s.interval.figures);
    let details = match figures {
        Some(m) if words.is_empty() => format!(
            "mismatch loss {:.2} dB · |Γ| {:.3}",
            m.mismatch_loss_db, m.gamma
        ),
        _ => words.to_string(),
    };
    let lines = vec![
        Line::styled(other, reading_style(app)),
        Line::styled(details, paint(app, Color::Gray, None)),
    ];
    Paragraph::new(lines).wrap(Wrap { trim: true }).render(
        Rect {
            height: digits::HEIGHT - 1,
            ..side
        },
        buf,
    );
    Paragraph::new(format!("{unit}{marker}"))
        .style(style)
        .render(
            Rect {
                y: area.y + digits::HEIGHT - 1,
                height: 1,
                ..side
            },
            buf,
        );
}

/// Frozen, or why no new samples come; nothing while they flow.
fn marker(app: &App, run: &CoupledRun) -> String {
    if run.frozen.is_some() {
        "  [frozen]".into()
    } else if let Some(why) = no_new_samples(app) {
        format!("  ◌ {why}: the last match")
    } else {
        String::new()
    }
}

/// One arm's power as the screen gives it: a value in dBm and watts, or a bound.
fn arm_text(name: &str, figures: &Figures) -> String {
    let Some(dbm) = figures.mean_dbm else {
        return format!("{name} no figure");
    };
    let watts = Si::new(figures.mean_w.unwrap_or(f64::NAN), "W");
    match figures.bound {
        Bound::Exact => format!("{name} {dbm:+.2} dBm {watts}"),
        Bound::AtLeast => format!("{name} ≥ {dbm:+.2} dBm"),
        Bound::AtMost => format!("{name} ≤ {dbm:+.2} dBm"),
        Bound::Unknown => format!("{name} no figure"),
    }
}

fn powers_line(shown: Option<&MatchNow>) -> String {
    let Some(shown) = shown else {
        return String::new();
    };
    let net = match shown.interval.net_w {
        Some(w) => format!("net {}", Si::new(w, "W")),
        None => "net not known".into(),
    };
    format!(
        "  {} · {} · {net}",
        arm_text("forward", &shown.forward),
        arm_text("reflected", &shown.reflected)
    )
}

/// The bar's top, dB of return loss: ten past the directivity, in tens, 30 at least.
fn bar_top_db(directivity_db: f64) -> f64 {
    (((directivity_db + 10.0) / 10.0).ceil() * 10.0).max(30.0)
}

fn return_loss_bar(
    app: &App,
    run: &CoupledRun,
    shown: Option<&MatchNow>,
    rows: &Rows,
    buf: &mut Buffer,
) {
    let (bar, markers) = (rows.bar, rows.markers);
    let directivity = return_loss_db(run.cal.leakage);
    let span = (0.0, bar_top_db(directivity));
    let left = " 0 dB ";
    let right = format!(" {:.0} dB", span.1);
    let width = bar
        .width
        .saturating_sub((left.chars().count() + right.len()) as u16);
    if width < 4 {
        return;
    }
    let x0 = bar.x + left.chars().count() as u16;
    buf.set_string(bar.x, bar.y, left, Style::new());
    buf.set_string(x0 + width, bar.y, &right, Style::new());
    let level = shown
        .and_then(|s| s.interval.figures)
        .map(|m| m.return_loss_db)
        .filter(|db| db.is_finite());
    let fill = level.map_or(0.0, |db| bar_position(db, span, width));
    let style = reading_style(app).patch(paint(app, Color::Green, None));
    for i in 0..width {
        let symbol = digits::eighths_left((fill - f64::from(i)).clamp(0.0, 1.0));
        let cell_style = if symbol == "·" { Style::new() } else { style };
        buf.set_string(x0 + i, bar.y, symbol, cell_style);
    }
    let column = |db: f64| bar_position(db, span, width).min(f64::from(width) - 1.0) as u16;
    let bold = Style::new().add_modifier(Modifier::BOLD);
    let at = column(directivity);
    let best = run.best_db().map(column);
    let legends = [
        format!(" directivity {directivity:.1} dB: the coupler resolves no better "),
        format!(" directivity {directivity:.1} dB "),
    ];
    // On the mark's right when it fits there, else on its left, never over the best
    // match's mark; else left out.
    let placed = legends.iter().find_map(|text| {
        let n = text.chars().count() as u16;
        let right = (at + 1 + n <= width).then_some(at + 1);
        let left = (n <= at).then(|| at - n);
        [right, left]
            .into_iter()
            .flatten()
            .find(|x| best.is_none_or(|b| b < *x || b >= x + n))
            .map(|x| (x, text))
    });
    if let Some((x, text)) = placed {
        buf.set_string(x0 + x, markers.y, text, paint(app, Color::Gray, None));
    }
    buf.set_string(x0 + at, markers.y, DIRECTIVITY_MARK, bold);
    if let Some(best) = best {
        buf.set_string(x0 + best, markers.y, HOLD_MARK, bold);
    }
}

/// The return loss the true match may have, given the coupler's directivity, in the
/// longest form that fits `width`.
fn range_line(run: &CoupledRun, shown: Option<&MatchNow>, width: usize) -> String {
    let directivity = return_loss_db(run.cal.leakage);
    let Some((low, high)) = shown.and_then(|s| s.interval.return_loss_range_db) else {
        return format!("  directivity {directivity:.1} dB: no match to give a range of");
    };
    // Each end rounded outwards, so the range shown holds the one worked out.
    let (low_text, low_swr) = (round_down(low, 2), swr_of_db(low));
    let low_swr = round_up(low_swr, swr_decimals(low_swr));
    let (rl, swrs) = if high.is_finite() {
        let high_swr = swr_of_db(high);
        (
            format!("{low_text:.2} to {:.2} dB", round_up(high, 2)),
            format!(
                " (SWR {} to {})",
                swr_text(round_down(high_swr, swr_decimals(high_swr))),
                swr_text(low_swr)
            ),
        )
    } else {
        (
            format!("at least {low_text:.2} dB"),
            format!(" (SWR at most {})", swr_text(low_swr)),
        )
    };
    let long = format!("  directivity {directivity:.1} dB leaves the true return loss {rl}{swrs}");
    if long.chars().count() <= width {
        long
    } else {
        format!("  directivity {directivity:.1} dB: true return loss {rl}")
    }
}

fn best_line(app: &App, run: &CoupledRun, shown: Option<&MatchNow>, width: usize) -> String {
    let Some(best) = run.best_db() else {
        return "  best   waiting for a match over a full averaging window".into();
    };
    let head = format!("  best   SWR {} ({best:.2} dB)", swr_text(swr_of_db(best)));
    let Some(now) = shown.and_then(MatchNow::value_db) else {
        return format!("{head}   now not a value, not compared");
    };
    let direction = match (no_new_samples(app), run.change_over_last_second(app.now)) {
        (Some(why), _) => why.to_string(),
        (None, Some(d)) if d > 0.05 => format!("getting better {d:+.2} dB/s"),
        (None, Some(d)) if d < -0.05 => format!("getting worse {d:+.2} dB/s"),
        (None, Some(_)) => "steady".into(),
        (None, None) => "…".into(),
    };
    let line = format!(
        "{head}   now {:.2} dB short of it   {direction}",
        (best - now).max(0.0)
    );
    let legend = format!("   ({HOLD_MARK} on the bar)");
    if line.chars().count() + legend.chars().count() <= width {
        line + &legend
    } else {
        line
    }
}
