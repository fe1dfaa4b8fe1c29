//! Large digits for the main reading and for a match (with ≥ and ≤ for its bounds), five
//! rows high, and the partial-block glyphs the level bar and the trend chart use.

use ratatui::buffer::Buffer;
use ratatui::style::Style;

/// Rows of a large digit.
pub const HEIGHT: u16 = 5;

/// The glyph of one character, row by row; None for a character it cannot draw.
fn glyph(c: char) -> Option<[&'static str; 5]> {
    Some(match c {
        '0' => ["███", "█ █", "█ █", "█ █", "███"],
        '1' => [" █ ", "██ ", " █ ", " █ ", "███"],
        '2' => ["███", "  █", "███", "█  ", "███"],
        '3' => ["███", "  █", " ██", "  █", "███"],
        '4' => ["█ █", "█ █", "███", "  █", "  █"],
        '5' => ["███", "█  ", "███", "  █", "███"],
        '6' => ["███", "█  ", "███", "█ █", "███"],
        '7' => ["███", "  █", "  █", "  █", "  █"],
        '8' => ["███", "█ █", "███", "█ █", "███"],
        '9' => ["███", "█ █", "███", "  █", "███"],
        '-' => ["   ", "   ", "███", "   ", "   "],
        '+' => ["   ", " █ ", "███", " █ ", "   "],
        '.' => [" ", " ", " ", " ", "█"],
        '≥' => ["██ ", "  █", "██ ", "   ", "███"],
        '≤' => [" ██", "█  ", " ██", "   ", "███"],
        ' ' => ["  ", "  ", "  ", "  ", "  "],
        _ => return None,
    })
}

/// Draws `text` in large digits with its top-left at (x, y); returns the width used.
/// Characters without a glyph are skipped.
pub fn render(text: &str, x: u16, y: u16, style: Style, buf: &mut Buffer) -> u16 {
    let area = buf.area;
    let mut column = x;
    for glyph in text.chars().filter_map(glyph) {
        let width = glyph[0].chars().count() as u16;
        if column + width > area.x + area.width {
            break;
        }
        for (row, line) in glyph.iter().enumerate() {
            let row = y + row as u16;
            if row < area.y + area.height {
                buf.set_string(column, row, line, style);
            }
        }
        column += width + 1;
    }
    column.saturating_sub(x)
}

/// A cell filled from the left by `covered` (0 to 1), in eighths; a dot when empty.
pub fn eighths_left(covered: f64) -> &'static str {
    const LEFT: [&str; 9] = ["·", "▏", "▎", "▍", "▌", "▋", "▊", "▉", "█"];
    LEFT[(covered * 8.0).round().clamp(0.0, 8.0) as usize]
}

/// A cell filled from the bottom by `n` eighths (1 to 8).
pub fn eighths_up(n: u16) -> &'static str {
    const UP: [&str; 9] = [" ", "▁", "▂", "▃", "▄", "▅", "▆", "▇", "█"];
    UP[usize::from(n.min(8))]
}
