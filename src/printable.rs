//! Text from files and the command line made safe to show or write into a line: a profile
//! name may hold any character TOML allows, and a line break or an escape sequence passed
//! on as it is would split a log's `#` lines or drive the terminal it is shown on.

use std::borrow::Cow;

/// `text` with every control character (C0, DEL and C1) written as its Rust escape —
/// `\n`, `\t`, `\u{1b}` — and everything else as it is; borrowed when there is none.
pub fn escape_controls(text: &str) -> Cow<'_, str> {
    if !text.chars().any(char::is_control) {
        return Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        if c.is_control() {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// `words` joined by single spaces into lines broken only between words, the first line
/// at most `first` characters long and the others at most `rest` (a word longer than its
/// line stands alone on it).
pub fn wrap_words<'a>(
    words: impl IntoIterator<Item = &'a str>,
    first: usize,
    rest: usize,
) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    for word in words {
        let limit = if lines.len() <= 1 { first } else { rest };
        match lines.last_mut() {
            Some(line) if line.chars().count() + 1 + word.chars().count() <= limit => {
                line.push(' ');
                line.push_str(word);
            }
            _ => lines.push(word.to_string()),
        }
    }
    lines
}

/// Which fields to show in `width` characters, each `(priority, width)`, joined by
/// separators `separator` characters wide: when they do not all fit, the field of lowest
/// priority is left out whole, then the next, never cut part-way, until they fit or one is
/// left. An empty field is never shown.
pub fn fields_to_keep(fields: &[(u8, usize)], separator: usize, width: usize) -> Vec<bool> {
    let mut kept: Vec<bool> = fields.iter().map(|&(_, w)| w > 0).collect();
    let length = |kept: &[bool]| {
        let shown = kept.iter().filter(|&&k| k).count();
        let text: usize = (0..fields.len())
            .filter(|&i| kept[i])
            .map(|i| fields[i].1)
            .sum();
        text + separator * shown.saturating_sub(1)
    };
    let mut by_priority: Vec<usize> = (0..fields.len()).filter(|&i| kept[i]).collect();
    by_priority.sort_by_key(|&i| fields[i].0);
    for &i in by_priority.iter().take(by_priority.len().saturating_sub(1)) {
        if length(&kept) <= width {
            break;
        }
        kept[i] = false;
    }
    kept
}

/// The fields, each `(priority, text)`, that fit in `width` characters joined by
/// `separator`, as [`fields_to_keep`] chooses them.
pub fn fit_fields(fields: &[(u8, &str)], separator: &str, width: usize) -> String {
    let widths: Vec<(u8, usize)> = fields
        .iter()
        .map(|&(p, f)| (p, f.chars().count()))
        .collect();
    let kept = fields_to_keep(&widths, separator.chars().count(), width);
    let shown: Vec<&str> = (0..fields.len())
        .filter(|&i| kept[i])
        .map(|i| fields[i].1)
        .collect();
    shown.join(separator)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: worked by hand. "a | bb | ccc" is 12 characters; at 9 the field of lowest
    // priority (bb, 1) goes first, leaving "a | ccc" (7); at 3 ccc goes too; the field of
    // highest priority stays even when it alone is too wide.
    #[test]
    fn fields_that_do_not_fit_are_dropped_whole_by_priority() {
        let fields = [(9, "a"), (1, "bb"), (2, "ccc")];
        assert_eq!(fit_fields(&fields, " | ", 12), "a | bb | ccc");
        assert_eq!(fit_fields(&fields, " | ", 9), "a | ccc");
        assert_eq!(fit_fields(&fields, " | ", 3), "a");
        assert_eq!(fit_fields(&[(0, "wide")], " | ", 2), "wide");
        assert_eq!(
            fit_fields(&[(0, "a"), (1, ""), (2, "b")], " | ", 20),
            "a | b"
        );
    }

    // Source: worked by hand. "aa bb cc dd" in a first line of 5 and later lines of 2:
    // "aa bb" fills the first (5), then each word stands alone; a word wider than its
    // line is kept whole; characters are counted, not bytes ("±±" is two).
    #[test]
    fn words_wrap_to_the_first_width_then_the_rest() {
        assert_eq!(
            wrap_words("aa bb cc dd".split(' '), 5, 2),
            ["aa bb", "cc", "dd"]
        );
        assert_eq!(wrap_words("aa bb cc".split(' '), 8, 8), ["aa bb cc"]);
        assert_eq!(wrap_words("toolong x".split(' '), 3, 3), ["toolong", "x"]);
        assert_eq!(wrap_words("±± ±±".split(' '), 5, 5), ["±± ±±"]);
        assert!(wrap_words(std::iter::empty(), 5, 5).is_empty());
    }

    // Source: the Rust reference's escapes as `char::escape_default` writes them (\n, \r,
    // \t by name; others as \u{hex}), and Unicode's Cc category (U+0000–U+001F,
    // U+007F–U+009F) for what counts as a control character.
    #[test]
    fn control_characters_are_written_as_escapes_and_nothing_else_changes() {
        assert_eq!(
            escape_controls("bench\nrig\r\t\u{1b}[2J\u{7f}\u{9b}"),
            "bench\\nrig\\r\\t\\u{1b}[2J\\u{7f}\\u{9b}"
        );
        assert_eq!(escape_controls("Ω-rig «µ» \\n"), "Ω-rig «µ» \\n");
        assert!(matches!(escape_controls("plain"), Cow::Borrowed("plain")));
    }
}
