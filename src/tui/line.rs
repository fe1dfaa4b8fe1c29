//! The text typed at a prompt: `tui-input`'s editing (cursor, word and line deletion) with
//! the keys a shell line uses, plus a selected pre-filled answer that the first typed
//! character replaces.

use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};
use tui_input::{Input, InputRequest};

/// Characters a prompt takes at most: a path or a quantity, never a document.
pub const MAX_CHARS: usize = 200;

/// A line being typed at a prompt.
#[derive(Debug, Clone, Default)]
pub struct LineEdit {
    input: Input,
    /// The whole text is selected: typing replaces it, a cursor key keeps it.
    selected: bool,
}

impl PartialEq for LineEdit {
    fn eq(&self, other: &Self) -> bool {
        self.text() == other.text()
            && self.cursor() == other.cursor()
            && self.selected == other.selected
    }
}

impl LineEdit {
    /// `text` with the cursor after it and nothing selected.
    pub fn new(text: &str) -> Self {
        LineEdit {
            input: Input::new(text.to_string()),
            selected: false,
        }
    }

    /// `text` offered as a default: selected, so the first typed character replaces it.
    pub fn offered(text: &str) -> Self {
        LineEdit {
            selected: !text.is_empty(),
            ..LineEdit::new(text)
        }
    }

    /// What has been typed.
    pub fn text(&self) -> &str {
        self.input.value()
    }

    /// Characters before the cursor.
    pub fn cursor(&self) -> usize {
        self.input.cursor()
    }

    /// True while the whole text is selected.
    pub fn is_selected(&self) -> bool {
        self.selected
    }

    /// The first column of the text shown in a field `width` cells wide, so that the
    /// cursor stays in view.
    pub fn scroll(&self, width: usize) -> usize {
        self.input.visual_scroll(width)
    }

    /// Applies an editing key; true when the text changed.
    pub fn key(&mut self, key: KeyEvent) -> bool {
        let before = self.text().to_string();
        let control = key.modifiers.contains(KeyModifiers::CONTROL);
        let request = match key.code {
            // Alt with a letter is no text either (a terminal sends Esc and then a fast
            // next key as one).
            KeyCode::Char(_) if key.modifiers.contains(KeyModifiers::ALT) => None,
            KeyCode::Char(c) if control => match c {
                'u' => Some(InputRequest::DeleteFromStart),
                'w' => Some(InputRequest::DeletePrevWord),
                'a' => Some(InputRequest::GoToStart),
                'e' => Some(InputRequest::GoToEnd),
                // Other control keys are not text: never inserted as letters.
                _ => None,
            },
            KeyCode::Char(c) => {
                self.replace_selection();
                (self.text().chars().count() < MAX_CHARS).then_some(InputRequest::InsertChar(c))
            }
            KeyCode::Backspace | KeyCode::Delete if self.selected => {
                self.replace_selection();
                None
            }
            KeyCode::Backspace => Some(InputRequest::DeletePrevChar),
            KeyCode::Delete => Some(InputRequest::DeleteNextChar),
            KeyCode::Left => Some(InputRequest::GoToPrevChar),
            KeyCode::Right => Some(InputRequest::GoToNextChar),
            KeyCode::Home => Some(InputRequest::GoToStart),
            KeyCode::End => Some(InputRequest::GoToEnd),
            _ => None,
        };
        // Any key that reaches here ends the selection: a cursor key keeps the text and
        // moves from the end, an edit works on the text as it stands.
        self.selected = false;
        if let Some(request) = request {
            self.input.handle(request);
        }
        self.text() != before
    }

    fn replace_selection(&mut self) {
        if self.selected {
            self.input = Input::default();
            self.selected = false;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn press(line: &mut LineEdit, code: KeyCode) {
        line.key(KeyEvent::new(code, KeyModifiers::NONE));
    }

    fn ctrl(line: &mut LineEdit, c: char) {
        line.key(KeyEvent::new(KeyCode::Char(c), KeyModifiers::CONTROL));
    }

    fn typed(line: &mut LineEdit, text: &str) {
        text.chars().for_each(|c| press(line, KeyCode::Char(c)));
    }

    // Source: the rule of issue 16: a selected default is replaced by the first typed
    // character, never appended to.
    #[test]
    fn typing_over_an_offered_default_replaces_it() {
        let mut line = LineEdit::offered("dbtrail-2026.csv");
        assert!(line.is_selected());
        typed(&mut line, "x.csv");
        assert_eq!(line.text(), "x.csv");
        assert!(!line.is_selected());
    }

    #[test]
    fn a_cursor_key_keeps_the_default_and_moves_within_it() {
        let mut line = LineEdit::offered("run.csv");
        press(&mut line, KeyCode::Left);
        assert!(!line.is_selected());
        assert_eq!((line.text(), line.cursor()), ("run.csv", 6));
        press(&mut line, KeyCode::Home);
        typed(&mut line, "a-");
        assert_eq!((line.text(), line.cursor()), ("a-run.csv", 2));
        press(&mut line, KeyCode::End);
        assert_eq!(line.cursor(), 9);
    }

    #[test]
    fn backspace_on_a_selection_clears_it() {
        let mut line = LineEdit::offered("run.csv");
        press(&mut line, KeyCode::Backspace);
        assert_eq!(line.text(), "");
    }

    // Source: common practice (the line editing of Unix shells): Ctrl-U deletes from the
    // start to the cursor, Ctrl-W the word before the cursor, Ctrl-A / Ctrl-E go to the
    // start / end.
    #[test]
    fn shell_line_keys_edit_instead_of_inserting_letters() {
        let mut line = LineEdit::new("logs/bench run.csv");
        ctrl(&mut line, 'w');
        assert_eq!(line.text(), "logs/bench ");
        ctrl(&mut line, 'a');
        assert_eq!(line.cursor(), 0);
        ctrl(&mut line, 'e');
        assert_eq!(line.cursor(), 11);
        press(&mut line, KeyCode::Left);
        press(&mut line, KeyCode::Left);
        ctrl(&mut line, 'u');
        assert_eq!((line.text(), line.cursor()), ("h ", 0));
        press(&mut line, KeyCode::Delete);
        assert_eq!(line.text(), " ");
        ctrl(&mut line, 'x');
        assert_eq!(line.text(), " ", "an unbound control key inserts nothing");
        line.key(KeyEvent::new(KeyCode::Char('f'), KeyModifiers::ALT));
        assert_eq!(line.text(), " ", "nor does Alt with a letter");
    }

    #[test]
    fn a_line_stops_growing_at_its_limit() {
        let mut line = LineEdit::new("");
        typed(&mut line, &"a".repeat(MAX_CHARS + 5));
        assert_eq!(line.text().chars().count(), MAX_CHARS);
    }
}
