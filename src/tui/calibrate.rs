//! The calibration screen: the same [`Desk`] as the line prompts, shown on a terminal with
//! the points table always in view and an input line at the bottom. Measuring runs on a
//! worker thread that owns the [`Bench`], so the screen keeps drawing its progress and
//! Esc or Ctrl-C can cancel it.

use std::sync::atomic::{AtomicBool, Ordering::Relaxed};
use std::sync::mpsc::{self, Receiver, Sender, TryRecvError};
use std::sync::Arc;
use std::time::{Duration, Instant};

use anyhow::Result;
use dbtrail::printable::wrap_words;
use dbtrail::procedure::{MeasureError, Measured, Progress};
use ratatui::crossterm::event::{
    self as term_event, Event as TermEvent, KeyCode, KeyEvent, KeyEventKind, KeyModifiers,
};
use ratatui::layout::{Constraint, Layout};
use ratatui::style::{Modifier, Style};
use ratatui::text::Line;
use ratatui::widgets::{Block, Paragraph};
use ratatui::{DefaultTerminal, Frame};

use crate::cli::calibrate::{Bench, Desk, Measuring, Outcome, Request, Step, HELP};

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

/// What the screen shows besides the desk.
struct View {
    input: String,
    message: String,
    mode: Mode,
}

/// Shown when the measuring thread has stopped (it failed): no more levels can be read,
/// but the points already taken can still be kept.
const WORKER_GONE: &str = "the measuring thread has stopped, so no more levels can be measured; \
    `save` writes the points taken so far and `quit` keeps them in a points CSV; then start \
    calibrate again";

/// What the measuring worker sends back.
enum FromWorker {
    Progress(Progress),
    Done(Result<Measured, MeasureError>),
}

/// The measuring worker: owns the bench, measures what it is sent.
struct Worker {
    jobs: Sender<Option<(f64, f64)>>,
    events: Receiver<FromWorker>,
    cancel: Arc<AtomicBool>,
}

impl Worker {
    fn start(mut bench: Bench, measuring: Measuring) -> Worker {
        let (jobs, job_rx) = mpsc::channel::<Option<(f64, f64)>>();
        let (event_tx, events) = mpsc::channel();
        let cancel = Arc::new(AtomicBool::new(false));
        let flag = Arc::clone(&cancel);
        std::thread::spawn(move || {
            for applied in job_rx {
                let mut shown = Instant::now();
                let result = bench.measure(applied, &measuring, &flag, |p| {
                    // A progress line every 50 ms is plenty for the eye.
                    if shown.elapsed() >= Duration::from_millis(50) {
                        shown = Instant::now();
                        let _ = event_tx.send(FromWorker::Progress(*p));
                    }
                });
                // A closed channel means the screen has gone: stop.
                if event_tx.send(FromWorker::Done(result)).is_err() {
                    break;
                }
            }
        });
        Worker {
            jobs,
            events,
            cancel,
        }
    }

    fn begin(
        &self,
        applied: Option<(f64, f64)>,
    ) -> Result<(), mpsc::SendError<Option<(f64, f64)>>> {
        self.cancel.store(false, Relaxed);
        self.jobs.send(applied)
    }
}

/// Runs the screen until the user saves or quits; the terminal is restored on every way out.
pub fn run(mut desk: Desk, bench: Bench) -> Result<()> {
    let worker = Worker::start(bench, desk.measuring);
    let mut terminal = ratatui::init();
    let outcome = screen(&mut terminal, &mut desk, &worker);
    ratatui::restore();
    if let Ok(Some(text)) = &outcome {
        // A closed standard output loses the closing line, not the saved profile.
        let _ = crate::cli::emit(&format!("{text}\n"));
    }
    outcome.map(|_| ())
}

fn screen(
    terminal: &mut DefaultTerminal,
    desk: &mut Desk,
    worker: &Worker,
) -> Result<Option<String>> {
    let mut view = View {
        input: String::new(),
        message: HELP.to_string(),
        mode: Mode::Typing,
    };
    loop {
        terminal.draw(|frame| draw(frame, desk, &view))?;
        loop {
            match worker.events.try_recv() {
                Ok(event) => {
                    if let Some(end) = on_worker(desk, &mut view, event) {
                        return Ok(Some(end));
                    }
                }
                Err(TryRecvError::Disconnected) if matches!(view.mode, Mode::Measuring { .. }) => {
                    // The points already taken are still here: say so rather than end.
                    view.mode = Mode::Typing;
                    view.message = WORKER_GONE.into();
                }
                Err(_) => break,
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
        if let Some(end) = on_key(desk, &mut view, worker, key)? {
            return Ok(Some(end));
        }
    }
}

fn on_worker(desk: &mut Desk, view: &mut View, event: FromWorker) -> Option<String> {
    match event {
        FromWorker::Progress(p) => {
            if let Mode::Measuring { progress, .. } = &mut view.mode {
                *progress = Some(p);
            }
            None
        }
        FromWorker::Done(result) => {
            let Mode::Measuring { request, .. } = std::mem::replace(&mut view.mode, Mode::Typing)
            else {
                return None;
            };
            let outcome = desk.finish(request, result);
            show(desk, view, outcome)
        }
    }
}

/// Shows an outcome; returns the closing text when it ends the screen.
fn show(desk: &Desk, view: &mut View, outcome: Outcome) -> Option<String> {
    match outcome {
        // The table is always in view above; keep only what is new.
        Outcome::Continue(text) => {
            view.message = text.replace(&desk.report(), "");
            None
        }
        Outcome::Saved(text) | Outcome::Quit(text) => Some(text),
    }
}

fn on_key(
    desk: &mut Desk,
    view: &mut View,
    worker: &Worker,
    key: KeyEvent,
) -> Result<Option<String>> {
    let ctrl_c = key.code == KeyCode::Char('c') && key.modifiers.contains(KeyModifiers::CONTROL);
    if let Mode::Measuring { cancelling, .. } = &mut view.mode {
        if ctrl_c || key.code == KeyCode::Esc {
            worker.cancel.store(true, Relaxed);
            *cancelling = true;
        }
        return Ok(None);
    }
    let line = match key.code {
        // Ctrl-C when idle is `quit`, with the same care for unsaved points.
        _ if ctrl_c => "quit".to_string(),
        KeyCode::Char(c) => {
            view.input.push(c);
            return Ok(None);
        }
        KeyCode::Backspace => {
            view.input.pop();
            return Ok(None);
        }
        KeyCode::Esc => {
            view.input.clear();
            return Ok(None);
        }
        KeyCode::Enter => std::mem::take(&mut view.input),
        _ => return Ok(None),
    };
    match desk.plan(&line) {
        Step::Done(outcome) => Ok(show(desk, view, outcome)),
        Step::Measure(request) => {
            if worker.begin(request.applied).is_err() {
                view.message = WORKER_GONE.into();
                return Ok(None);
            }
            view.mode = Mode::Measuring {
                request,
                started: Instant::now(),
                progress: None,
                cancelling: false,
            };
            Ok(None)
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

fn draw(frame: &mut Frame, desk: &Desk, view: &View) {
    let area = frame.area();
    let inner = usize::from(area.width.saturating_sub(2));
    let message_text = measuring_text(desk, &view.mode).unwrap_or_else(|| view.message.clone());
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
        Paragraph::new(wrap_text(&desk.report(), inner))
            .block(Block::bordered().title(" points and fits ")),
        table,
    );
    frame.render_widget(
        Paragraph::new(message_lines).block(Block::bordered()),
        message,
    );
    let busy = matches!(view.mode, Mode::Measuring { .. });
    let cursor = if busy { "" } else { "▏" };
    let prompt = format!(
        " {}{}{cursor}   (help · save · quit)",
        desk.prompt(),
        view.input
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
    use dbtrail::detector::ModelKind;
    use dbtrail::procedure::{base_profile, Session, SettleRule};
    use dbtrail::profile::raw::RawAdc;
    use dbtrail::stats::Averaging;
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;

    fn desk() -> Desk {
        let adc = RawAdc {
            bits: 12,
            vref: 4.095,
            divider: None,
            zero_counts: None,
            clip_margin: None,
        };
        let session = Session::new(base_profile("t", adc, 50.0, 10e6), ModelKind::Table);
        let measuring = Measuring {
            rule: SettleRule::default(),
            averaging: Averaging::Samples(100),
        };
        Desk::new(session, "t.toml".into(), false, measuring, "a test".into())
    }

    /// The screen's rows as text.
    fn rows(desk: &Desk, view: &View, width: u16, height: u16) -> Vec<String> {
        let mut terminal = Terminal::new(TestBackend::new(width, height)).unwrap();
        terminal.draw(|frame| draw(frame, desk, view)).unwrap();
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

    fn typing(message: &str) -> View {
        View {
            input: String::new(),
            message: message.to_string(),
            mode: Mode::Typing,
        }
    }

    // Source: issue 16: at 80 and 100 columns the help is shown whole, nothing cut
    // mid-word, `save`/`quit` and the safety text in view.
    #[test]
    fn help_is_shown_whole_at_80_and_100_columns() {
        let desk = desk();
        for (width, height) in [(80, 24), (100, 30)] {
            let screen = rows(&desk, &typing(HELP), width, height);
            let shown = words(&screen);
            assert!(
                shown.contains(&flat(HELP)),
                "{width}×{height}:\n{}",
                screen.join("\n")
            );
        }
    }

    // Source: issue 16: warnings wrap to the width instead of being cut.
    #[test]
    fn a_long_warning_wraps_instead_of_being_cut() {
        let mut desk = desk();
        let at = |counts| dbtrail::procedure::Measured {
            counts,
            std_counts: 0.5,
            samples: 100,
        };
        for (level, counts) in [("-60dBm", 500.0), ("-30dBm", 1250.0), ("0dBm", 2000.0)] {
            desk.session.add(level, at(counts)).unwrap();
        }
        desk.session.add("-45dBm", at(1900.0)).unwrap();
        let warning = desk.session.warnings().remove(0);
        for (width, height) in [(80, 24), (100, 30)] {
            let screen = rows(&desk, &typing(""), width, height);
            assert!(
                words(&screen).contains(&flat(&warning)),
                "{width}×{height}:\n{}",
                screen.join("\n")
            );
        }
    }

    /// The calibrate screen exactly, at both sizes: on opening (the help) and with three
    /// points in the table; a change shows as a difference to review (see the live
    /// screen's snapshots in src/tui/tests.rs).
    #[test]
    fn the_calibrate_screen_at_80_by_24_and_100_by_30() {
        let mut with_points = desk();
        for (level, counts) in [("-20dBm", 500.0), ("-10dBm", 1250.0), ("0dBm", 2000.0)] {
            let measured = dbtrail::procedure::Measured {
                counts,
                std_counts: 0.5,
                samples: 100,
            };
            with_points.session.add(level, measured).unwrap();
        }
        for (width, height) in [(80, 24), (100, 30)] {
            let opening = rows(&desk(), &typing(HELP), width, height).join("\n");
            insta::assert_snapshot!(format!("calibrate-opening-{width}x{height}"), opening);
            let table = rows(&with_points, &typing(""), width, height).join("\n");
            insta::assert_snapshot!(format!("calibrate-points-{width}x{height}"), table);
        }
    }

    // Source: issue 16's decision: the screen shows a measurement's progress and how to
    // cancel it while it runs.
    #[test]
    fn a_running_measurement_shows_its_progress_and_how_to_cancel() {
        let mut desk = desk();
        let Step::Measure(request) = desk.plan("0dBm") else {
            panic!("a level asks for a measurement");
        };
        let view = View {
            input: String::new(),
            message: String::new(),
            mode: Mode::Measuring {
                request,
                started: Instant::now(),
                progress: Some(Progress {
                    samples: 120,
                    elapsed_s: 0.12,
                    settled: false,
                }),
                cancelling: false,
            },
        };
        let shown = words(&rows(&desk, &view, 80, 24));
        assert!(
            shown.contains("measuring 0dBm")
                && shown.contains("120 samples, 0.1 s of at most 10 s")
                && shown.contains("Esc or Ctrl-C cancels"),
            "{shown}"
        );
    }

    // Source: issue 16's decision: a cancelled measurement adds no point and says so.
    #[test]
    fn a_cancelled_measurement_adds_no_point() {
        let mut desk = desk();
        let Step::Measure(request) = desk.plan("0dBm") else {
            panic!("a level asks for a measurement");
        };
        let Outcome::Continue(text) = desk.finish(request, Err(MeasureError::Cancelled)) else {
            panic!("the session goes on");
        };
        assert!(text.contains("0dBm: measurement cancelled"), "{text}");
        assert!(desk.session.points.is_empty());
    }
}
