//! The calibration screen: the same [`Desk`] as the line prompts, shown on a terminal with
//! the points table always in view and an input line at the bottom.

use anyhow::Result;
use ratatui::crossterm::event::{
    self as term_event, Event as TermEvent, KeyCode, KeyEventKind, KeyModifiers,
};
use ratatui::layout::{Constraint, Layout};
use ratatui::style::{Modifier, Style};
use ratatui::text::Line;
use ratatui::widgets::{Block, Paragraph, Wrap};
use ratatui::{DefaultTerminal, Frame};

use crate::cli::calibrate::{Desk, Outcome, HELP};

/// What the screen shows besides the desk.
struct View {
    input: String,
    message: String,
    busy: bool,
}

/// Runs the screen until the user saves or quits; the terminal is restored on every way out.
pub fn run(mut desk: Desk) -> Result<()> {
    let mut terminal = ratatui::init();
    let outcome = screen(&mut terminal, &mut desk);
    ratatui::restore();
    if let Ok(Some(text)) = &outcome {
        // A closed standard output loses the closing line, not the saved profile.
        let _ = crate::cli::emit(&format!("{text}\n"));
    }
    outcome.map(|_| ())
}

fn screen(terminal: &mut DefaultTerminal, desk: &mut Desk) -> Result<Option<String>> {
    let mut view = View {
        input: String::new(),
        message: HELP.to_string(),
        busy: false,
    };
    loop {
        terminal.draw(|frame| draw(frame, desk, &view))?;
        let TermEvent::Key(key) = term_event::read()? else {
            continue;
        };
        if key.kind == KeyEventKind::Release {
            continue;
        }
        match key.code {
            KeyCode::Char('c') if key.modifiers.contains(KeyModifiers::CONTROL) => return Ok(None),
            KeyCode::Char(c) => view.input.push(c),
            KeyCode::Backspace => {
                view.input.pop();
            }
            KeyCode::Esc => view.input.clear(),
            KeyCode::Enter => {
                let line = std::mem::take(&mut view.input);
                view.busy = true;
                view.message = format!(
                    "{}{line}\nwaiting for the reading to settle…",
                    desk.prompt()
                );
                terminal.draw(|frame| draw(frame, desk, &view))?;
                view.busy = false;
                match desk.handle(&line) {
                    // The table is always in view above; keep only what is new.
                    Outcome::Continue(text) => view.message = text.replace(&desk.report(), ""),
                    Outcome::Saved(text) => return Ok(Some(text)),
                    Outcome::Quit => return Ok(Some("left without saving".into())),
                }
            }
            _ => {}
        }
    }
}

fn draw(frame: &mut Frame, desk: &Desk, view: &View) {
    let [title, table, message, input] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Min(6),
        Constraint::Length(10),
        Constraint::Length(1),
    ])
    .areas(frame.area());
    let title_text = format!(
        " dbtrail calibrate · {} · {} points · {} frequency entries · saving model {}",
        desk.source,
        desk.session.points.len(),
        desk.session.freq_entries.len(),
        desk.session.model
    );
    frame.render_widget(
        Paragraph::new(title_text).style(Style::new().add_modifier(Modifier::REVERSED)),
        title,
    );
    let report: Vec<Line> = desk
        .report()
        .lines()
        .map(|l| Line::from(l.to_string()))
        .collect();
    frame.render_widget(
        Paragraph::new(report).block(Block::bordered().title(" points and fits ")),
        table,
    );
    let lines: Vec<Line> = view
        .message
        .lines()
        .map(|l| Line::from(l.to_string()))
        .collect();
    frame.render_widget(
        Paragraph::new(lines)
            .wrap(Wrap { trim: false })
            .block(Block::bordered()),
        message,
    );
    let cursor = if view.busy { "" } else { "▏" };
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
