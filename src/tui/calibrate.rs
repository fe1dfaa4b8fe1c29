//! The calibration screen: the [`Desk`] that the line prompts drive too, shown on a
//! terminal with the points table always in view and an input line at the bottom. Keys
//! and the measuring worker's events become [`ScreenEvent`]s; [`Screen::update`] is the
//! one place the screen's state changes, and [`draw`] only reads it. Measuring runs on the
//! worker, so the screen keeps drawing its progress and Esc or Ctrl-C can cancel it.

use std::sync::mpsc::TryRecvError;
use std::time::{Duration, Instant};

use anyhow::Result;
use dbtrail::printable::wrap_words;
use dbtrail::procedure::Progress;
use ratatui::crossterm::event::{
    self as term_event, Event as TermEvent, KeyCode, KeyEvent, KeyEventKind, KeyModifiers,
};
use ratatui::layout::{Constraint, Layout};
use ratatui::style::{Modifier, Style};
use ratatui::text::Line;
use ratatui::widgets::{Block, Paragraph};
use ratatui::{DefaultTerminal, Frame};

use crate::desk::bench::{Applied, BenchEvent, Worker};
use crate::desk::{text, Desk, Ending, Outcome, Request, Step};

/// What the screen is doing.
enum Mode {
    /// Taking a line of input.
    Typing,
    /// A measurement is running on the worker.
    Measuring {
        request: Request,
        started: Instant,
        progress: Option<Progress>,
        cancelling: bool,
    },
}

/// The screen's state: the desk, the line being typed, the last step's words and whether a
/// measurement runs.
pub struct Screen {
    desk: Desk,
    input: String,
    message: String,
    mode: Mode,
}

/// What the screen reacts to.
#[derive(Debug)]
pub enum ScreenEvent {
    /// A key pressed.
    Key(KeyEvent),
    /// The measuring worker's progress or result.
    Bench(BenchEvent),
    /// The measuring worker has stopped.
    BenchGone,
}

/// What the screen asks its loop to do.
#[derive(Debug, PartialEq)]
enum Command {
    /// Measure this level on the worker.
    Measure(Applied),
    /// Cancel the running measurement.
    Cancel,
    /// Close the screen.
    End(Ending),
}

/// Shown when the measuring thread has stopped (it failed): no more levels can be read,
/// but the points already taken can still be kept.
const WORKER_GONE: &str = "the measuring thread has stopped, so no more levels can be measured; \
    `save` writes the points taken so far and `quit` keeps them in a points CSV; then start \
    calibrate again";

/// Runs the screen until the user saves or quits, measuring on `worker`; the terminal is
/// restored on every way out. Returns how the session ended, for the caller to say.
pub fn run(desk: Desk, worker: &Worker) -> Result<Option<Ending>> {
    let mut screen = Screen::new(desk);
    let mut terminal = ratatui::init();
    let outcome = event_loop(&mut terminal, &mut screen, worker);
    ratatui::restore();
    outcome
}

fn event_loop(
    terminal: &mut DefaultTerminal,
    screen: &mut Screen,
    worker: &Worker,
) -> Result<Option<Ending>> {
    loop {
        terminal.draw(|frame| draw(frame, screen))?;
        loop {
            let event = match worker.events.try_recv() {
                Ok(event) => ScreenEvent::Bench(event),
                Err(TryRecvError::Disconnected) => ScreenEvent::BenchGone,
                Err(TryRecvError::Empty) => break,
            };
            let gone = matches!(event, ScreenEvent::BenchGone);
            if let Some(end) = feed(screen, worker, event) {
                return Ok(Some(end));
            }
            if gone {
                break;
            }
        }
        if !term_event::poll(Duration::from_millis(50))? {
            continue;
        }
        let TermEvent::Key(key) = term_event::read()? else {
            continue;
        };
        if key.kind == KeyEventKind::Release {
            continue;
        }
        if let Some(end) = feed(screen, worker, ScreenEvent::Key(key)) {
            return Ok(Some(end));
        }
    }
}

/// Gives `event` to the screen and carries out what it asks; returns the ending when the
/// screen closes.
fn feed(screen: &mut Screen, worker: &Worker, event: ScreenEvent) -> Option<Ending> {
    match screen.update(event)? {
        Command::Measure(applied) => {
            if worker.begin(applied).is_err() {
                return feed(screen, worker, ScreenEvent::BenchGone);
            }
            None
        }
        Command::Cancel => {
            worker.cancel();
            None
        }
        Command::End(ending) => Some(ending),
    }
}

impl Screen {
    /// The screen on opening: the help shown, nothing typed.
    fn new(desk: Desk) -> Self {
        Screen {
            desk,
            input: String::new(),
            message: text::HELP.to_string(),
            mode: Mode::Typing,
        }
    }

    /// The one way the screen's state changes.
    fn update(&mut self, event: ScreenEvent) -> Option<Command> {
        match event {
            ScreenEvent::Key(key) => self.on_key(key),
            ScreenEvent::Bench(BenchEvent::Progress(p)) => {
                if let Mode::Measuring { progress, .. } = &mut self.mode {
                    *progress = Some(p);
                }
                None
            }
            ScreenEvent::Bench(BenchEvent::Done(result)) => {
                let Mode::Measuring { request, .. } =
                    std::mem::replace(&mut self.mode, Mode::Typing)
                else {
                    return None;
                };
                let outcome = self.desk.finish(request, result);
                self.show(outcome)
            }
            ScreenEvent::BenchGone => {
                // The points already taken are still here: say so rather than end.
                if matches!(self.mode, Mode::Measuring { .. }) {
                    self.mode = Mode::Typing;
                    self.message = WORKER_GONE.into();
                }
                None
            }
        }
    }

    /// Shows an outcome: the step's words, as the table is always in view above.
    fn show(&mut self, outcome: Outcome) -> Option<Command> {
        match outcome {
            Outcome::Continue(said) => {
                self.message = text::message(&self.desk, &said);
                None
            }
            Outcome::End(ending) => Some(Command::End(ending)),
        }
    }

    fn on_key(&mut self, key: KeyEvent) -> Option<Command> {
        let ctrl_c =
            key.code == KeyCode::Char('c') && key.modifiers.contains(KeyModifiers::CONTROL);
        if let Mode::Measuring { cancelling, .. } = &mut self.mode {
            if ctrl_c || key.code == KeyCode::Esc {
                *cancelling = true;
                return Some(Command::Cancel);
            }
            return None;
        }
        let line = match key.code {
            // Ctrl-C when idle is `quit`, with the same care for unsaved points.
            _ if ctrl_c => "quit".to_string(),
            KeyCode::Char(c) => {
                self.input.push(c);
                return None;
            }
            KeyCode::Backspace => {
                self.input.pop();
                return None;
            }
            KeyCode::Esc => {
                self.input.clear();
                return None;
            }
            KeyCode::Enter => std::mem::take(&mut self.input),
            _ => return None,
        };
        match self.desk.plan(&line) {
            Step::Done(outcome) => self.show(outcome),
            Step::Measure(request) => {
                let applied = request.applied;
                self.mode = Mode::Measuring {
                    request,
                    started: Instant::now(),
                    progress: None,
                    cancelling: false,
                };
                Some(Command::Measure(applied))
            }
        }
    }
}

/// The message while a measurement runs.
fn measuring_text(desk: &Desk, mode: &Mode) -> Option<String> {
    let Mode::Measuring {
        request,
        started,
        progress,
        cancelling,
    } = mode
    else {
        return None;
    };
    let timeout = desk.measuring.rule.timeout_s;
    let state = match progress {
        None => format!("starting ({:.1} s)", started.elapsed().as_secs_f64()),
        Some(p) if p.settled => format!("settled, averaging: {} samples", p.samples),
        Some(p) => format!(
            "waiting for the reading to settle: {} samples, {:.1} s of at most {timeout} s",
            p.samples, p.elapsed_s
        ),
    };
    let keys = if *cancelling {
        "cancelling…"
    } else {
        "Esc or Ctrl-C cancels this measurement"
    };
    Some(format!("measuring {}\n{state}\n{keys}", request.line))
}

/// `text` wrapped to `width` columns between words; a wrapped line keeps its indent and
/// its continuation lines are indented two more.
fn wrap_text(text: &str, width: usize) -> Vec<Line<'static>> {
    let width = width.max(8);
    let mut out = Vec::new();
    for line in text.lines() {
        if line.chars().count() <= width {
            out.push(Line::from(line.to_string()));
            continue;
        }
        let indent = line
            .chars()
            .take_while(|c| *c == ' ')
            .count()
            .min(width / 2);
        let first = width - indent;
        let rest = first.saturating_sub(2).max(4);
        for (i, part) in wrap_words(line.split_whitespace(), first, rest)
            .into_iter()
            .enumerate()
        {
            let pad = if i == 0 { indent } else { indent + 2 };
            out.push(Line::from(format!("{:pad$}{part}", "")));
        }
    }
    out
}

fn draw(frame: &mut Frame, screen: &Screen) {
    let desk = &screen.desk;
    let area = frame.area();
    let inner = usize::from(area.width.saturating_sub(2));
    let message_text = measuring_text(desk, &screen.mode).unwrap_or_else(|| screen.message.clone());
    let message_lines = wrap_text(&message_text, inner);
    // The message takes what it needs; the table keeps at least its header and a row.
    let most = area.height.saturating_sub(2 + 5);
    let wanted = u16::try_from(message_lines.len() + 2).unwrap_or(u16::MAX);
    let [title, table, message, input] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Min(5),
        Constraint::Length(wanted.clamp(3, most.max(3))),
        Constraint::Length(1),
    ])
    .areas(area);
    let title_text = format!(" {}", title_line(desk, usize::from(area.width)));
    frame.render_widget(
        Paragraph::new(title_text).style(Style::new().add_modifier(Modifier::REVERSED)),
        title,
    );
    frame.render_widget(
        Paragraph::new(wrap_text(&text::table(desk), inner))
            .block(Block::bordered().title(" points and fits ")),
        table,
    );
    frame.render_widget(
        Paragraph::new(message_lines).block(Block::bordered()),
        message,
    );
    let busy = matches!(screen.mode, Mode::Measuring { .. });
    let cursor = if busy { "" } else { "▏" };
    let prompt = format!(
        " {}{}{cursor}   (help · save · quit)",
        text::prompt(desk),
        screen.input
    );
    frame.render_widget(
        Paragraph::new(prompt).style(Style::new().add_modifier(Modifier::BOLD)),
        input,
    );
}

/// The title's facts, those that fit in `width` whole: the source first to go, the
/// model (already in the table) next, the counts last.
fn title_line(desk: &Desk, width: usize) -> String {
    let points = format!("{} points", desk.session.points.len());
    let entries = format!("{} frequency entries", desk.session.freq_entries.len());
    let model = format!("saving model {}", desk.session.model);
    let fields = [
        (9, "dbtrail calibrate"),
        (1, desk.source.as_str()),
        (8, points.as_str()),
        (7, entries.as_str()),
        (3, model.as_str()),
    ];
    dbtrail::printable::fit_fields(&fields, " · ", width.saturating_sub(1))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::desk::tests::{at, desk};
    use dbtrail::procedure::MeasureError;
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;

    /// The screen's rows as text.
    fn rows(screen: &Screen, width: u16, height: u16) -> Vec<String> {
        let mut terminal = Terminal::new(TestBackend::new(width, height)).unwrap();
        terminal.draw(|frame| draw(frame, screen)).unwrap();
        let buffer = terminal.backend().buffer();
        (0..height)
            .map(|y| (0..width).map(|x| buffer[(x, y)].symbol()).collect())
            .collect()
    }

    /// The words of the screen, borders dropped, in reading order.
    fn words(rows: &[String]) -> String {
        let text: Vec<String> = rows
            .iter()
            .map(|r| r.trim_matches(|c: char| "│┌┐└┘─ ".contains(c)).to_string())
            .collect();
        text.join(" ")
            .split_whitespace()
            .collect::<Vec<_>>()
            .join(" ")
    }

    fn flat(text: &str) -> String {
        text.split_whitespace().collect::<Vec<_>>().join(" ")
    }

    /// Asserts that `text`'s words are all on `screen`, in order, at 80×24 and 100×30.
    fn shown_whole(screen: &Screen, text: &str) {
        for (width, height) in [(80, 24), (100, 30)] {
            let shown = rows(screen, width, height);
            assert!(
                words(&shown).contains(&flat(text)),
                "{width}×{height}:\n{}",
                shown.join("\n")
            );
        }
    }

    fn typing(desk: Desk, message: &str) -> Screen {
        Screen {
            message: message.to_string(),
            ..Screen::new(desk)
        }
    }

    fn key(code: KeyCode) -> ScreenEvent {
        ScreenEvent::Key(KeyEvent::new(code, KeyModifiers::NONE))
    }

    /// Types `line` and Enter; returns what the screen asked for at Enter.
    fn enter(screen: &mut Screen, line: &str) -> Option<Command> {
        for c in line.chars() {
            assert_eq!(screen.update(key(KeyCode::Char(c))), None);
        }
        screen.update(key(KeyCode::Enter))
    }

    // Source: issue 16: at 80 and 100 columns the help is shown whole, nothing cut
    // mid-word, `save`/`quit` and the safety text in view.
    #[test]
    fn help_is_shown_whole_at_80_and_100_columns() {
        shown_whole(&Screen::new(desk()), text::HELP);
    }

    // Source: issue 16: warnings wrap to the width instead of being cut.
    #[test]
    fn a_long_warning_wraps_instead_of_being_cut() {
        let mut desk = desk();
        for (level, counts) in [("-60dBm", 500.0), ("-30dBm", 1250.0), ("0dBm", 2000.0)] {
            desk.session.add(level, at(counts)).unwrap();
        }
        desk.session.add("-45dBm", at(1900.0)).unwrap();
        let warning = desk.session.warnings().remove(0);
        shown_whole(&typing(desk, ""), &warning);
    }

    /// The calibrate screen exactly, at both sizes: on opening (the help) and with three
    /// points in the table; a change shows as a difference to review (see the live
    /// screen's snapshots in src/tui/tests.rs).
    #[test]
    fn the_calibrate_screen_at_80_by_24_and_100_by_30() {
        let mut with_points = desk();
        for (level, counts) in [("-20dBm", 500.0), ("-10dBm", 1250.0), ("0dBm", 2000.0)] {
            with_points.session.add(level, at(counts)).unwrap();
        }
        let with_points = typing(with_points, "");
        for (width, height) in [(80, 24), (100, 30)] {
            let opening = rows(&Screen::new(desk()), width, height).join("\n");
            insta::assert_snapshot!(format!("calibrate-opening-{width}x{height}"), opening);
            let table = rows(&with_points, width, height).join("\n");
            insta::assert_snapshot!(format!("calibrate-points-{width}x{height}"), table);
        }
    }

    // Source: issue 16's decision: the screen shows a measurement's progress and how to
    // cancel it while it runs.
    #[test]
    fn a_running_measurement_shows_its_progress_and_how_to_cancel() {
        let mut screen = typing(desk(), "");
        let Some(Command::Measure(Some(_))) = enter(&mut screen, "0dBm") else {
            panic!("a level asks for a measurement");
        };
        let progress = Progress {
            samples: 120,
            elapsed_s: 0.12,
            settled: false,
        };
        screen.update(ScreenEvent::Bench(BenchEvent::Progress(progress)));
        let shown = words(&rows(&screen, 80, 24));
        assert!(
            shown.contains("measuring 0dBm")
                && shown.contains("120 samples, 0.1 s of at most 10 s")
                && shown.contains("Esc or Ctrl-C cancels"),
            "{shown}"
        );
    }

    // Source: docs/calibration.md (calibrate, board temperature): `temp C` tags the
    // points that follow; the screen keeps the temperature in the prompt, the point is
    // tagged with it, and the table shows its °C column.
    #[test]
    fn a_typed_board_temperature_is_in_the_prompt_and_tags_the_next_point() {
        let mut screen = typing(desk(), "");
        assert_eq!(enter(&mut screen, "skip"), None);
        assert_eq!(enter(&mut screen, "temp 31.5"), None);
        let shown = words(&rows(&screen, 80, 24));
        assert!(shown.contains("tagged temp_c = 31.5"), "{shown}");
        assert!(shown.contains("level (board 31.5 °C)>"), "{shown}");
        let Some(Command::Measure(_)) = enter(&mut screen, "0dBm") else {
            panic!("a level asks for a measurement");
        };
        screen.update(ScreenEvent::Bench(BenchEvent::Done(Ok(at(2000.0)))));
        assert_eq!(screen.desk.session.points[0].measured.temp_c, Some(31.5));
        // At 80 columns the row stays whole (not wrapped), its °C in place of the count.
        let shown = rows(&screen, 80, 24);
        assert!(
            shown.iter().any(|r| r.contains("±std      °C")),
            "{shown:#?}"
        );
        assert!(
            shown
                .iter()
                .any(|r| r.contains(" 1  0dBm ") && r.contains("2000.00") && r.contains("31.50")),
            "{shown:#?}"
        );
    }

    // Source: issue 16's decision: a cancelled measurement adds no point and says so.
    #[test]
    fn a_cancelled_measurement_adds_no_point() {
        let mut screen = typing(desk(), "");
        let Some(Command::Measure(_)) = enter(&mut screen, "0dBm") else {
            panic!("a level asks for a measurement");
        };
        assert_eq!(screen.update(key(KeyCode::Esc)), Some(Command::Cancel));
        let cancelled = BenchEvent::Done(Err(MeasureError::Cancelled));
        assert_eq!(screen.update(ScreenEvent::Bench(cancelled)), None);
        assert!(
            screen.message.contains("0dBm: measurement cancelled"),
            "{}",
            screen.message
        );
        assert!(screen.desk.session.points.is_empty());
        assert!(matches!(screen.mode, Mode::Typing));
    }
}
