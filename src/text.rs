//! Text that reaches a terminal: names and excerpts from files the user did not
//! write are escaped before they are printed.
//!
//! Takes in: any string (a path, a line from a file, an error message). Gives
//! out: the same text with every control character (C0, DEL, C1 — including
//! newline, carriage return, tab and ESC) and every Unicode bidirectional
//! override written as a visible `\u{XX}` escape, so a hostile file name or line
//! cannot move the cursor, recolour the terminal, forge a second message line or
//! reorder what is shown. Escaping is idempotent: escaped text contains no
//! character that would be escaped again.

use std::path::Path;

/// Whether `c` is escaped by [`escape_controls`].
fn needs_escape(c: char) -> bool {
    c.is_control() || matches!(c, '\u{202A}'..='\u{202E}' | '\u{2066}'..='\u{2069}')
}

/// `s` with every control character and bidirectional override escaped as
/// `\u{XX}` (see the module documentation).
pub fn escape_controls(s: &str) -> String {
    if !s.chars().any(needs_escape) {
        return s.to_string();
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        if needs_escape(c) {
            out.push_str(&format!("\\u{{{:x}}}", c as u32));
        } else {
            out.push(c);
        }
    }
    out
}

/// A path for a message: lossy UTF-8 (invalid bytes become U+FFFD), escaped.
pub fn escaped_path(p: &Path) -> String {
    escape_controls(&p.to_string_lossy())
}

/// At most `max_chars` characters of one line of a file, escaped, with `…`
/// when it was cut: the only form in which a line from a file that is not a
/// profile written by the user appears in an error.
pub fn excerpt(line: &str, max_chars: usize) -> String {
    let mut cut: String = line.chars().take(max_chars).collect();
    if line.chars().nth(max_chars).is_some() {
        cut.push('…');
    }
    escape_controls(&cut)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn control_characters_and_bidi_overrides_become_visible_escapes() {
        // ESC (0x1b), newline, DEL (0x7f), a C1 control (0x9b, CSI) and the
        // right-to-left override U+202E: the ECMA-48 / Unicode UAX #9 characters
        // a terminal acts on (common practice for log escaping).
        let s = "a\u{1b}[31mb\nc\u{7f}d\u{9b}e\u{202e}f";
        let e = escape_controls(s);
        assert_eq!(e, "a\\u{1b}[31mb\\u{a}c\\u{7f}d\\u{9b}e\\u{202e}f");
        assert!(!e.chars().any(needs_escape));
        assert_eq!(escape_controls(&e), e, "idempotent");
        assert_eq!(escape_controls("plain ü"), "plain ü");
    }

    #[test]
    fn an_excerpt_is_cut_to_its_length_and_marked() {
        assert_eq!(excerpt("abcdef", 4), "abcd…");
        assert_eq!(excerpt("abc", 4), "abc");
        assert_eq!(excerpt("a\tb", 4), "a\\u{9}b");
    }
}
