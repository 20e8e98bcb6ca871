//! Making untrusted text safe where it lands.
//!
//! Plan text, data values, file paths and the contents of a results file come from whoever
//! wrote them. Printed raw, a control sequence could repaint the terminal (an ANSI escape
//! turning a failed verification into a line that reads "verified"), a right-to-left override
//! could reverse what a reader sees, and in Markdown an HTML comment or tag could hide or
//! replace sworn's own lines. Every such string passes through one of these functions where it
//! is printed or rendered:
//!
//! - [`terminal`] for anything printed to stdout or stderr: control characters (C0, DEL, C1,
//!   including newline, carriage return and ESC) and bidirectional-formatting characters become
//!   visible escapes such as `\u{1b}`, so the text stays on one line and shows what it holds;
//! - [`line`] for a title or a table cell: runs of whitespace (newlines included) collapse to
//!   one space, then [`terminal`]'s escaping applies;
//! - [`markdown`] for text placed in a Markdown report: [`line`], then `&`, `<`, `>` as HTML
//!   entities and `|` escaped for tables;
//! - [`html`] for text placed in the HTML report: [`line`], then `&`, `<`, `>`, `"` and `'` as
//!   character references, so no tag, attribute or comment can be opened by plan or data text;
//! - [`clip`] to show at most a given number of characters of a bad value in a message.
//!
//! Invariant: the output of [`terminal`], [`line`], [`markdown`] and [`html`] holds no control or
//! bidirectional-formatting character and no line break.

use std::fmt::Write;

/// Whether `c` must not reach a terminal or report raw: C0 and C1 controls, DEL, and the
/// Unicode bidirectional-formatting characters (marks, embeddings, overrides, isolates).
pub fn is_unsafe(c: char) -> bool {
    c.is_control()
        || matches!(
            c,
            '\u{061C}'
                | '\u{200E}'
                | '\u{200F}'
                | '\u{202A}'..='\u{202E}'
                | '\u{2066}'..='\u{2069}'
                | '\u{2028}'
                | '\u{2029}'
        )
}

/// Text safe for one terminal line: every unsafe character (see [`is_unsafe`]) is written as
/// a visible escape: `\n`, `\r`, `\t`, or `\u{…}` with the code point in hexadecimal.
pub fn terminal(s: &str) -> String {
    if !s.chars().any(is_unsafe) {
        return s.to_string();
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        match c {
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            '\t' => out.push_str("\\t"),
            c if is_unsafe(c) => {
                let _ = write!(out, "\\u{{{:x}}}", c as u32);
            }
            c => out.push(c),
        }
    }
    out
}

/// A title or table cell: whitespace runs (line breaks included) become one space, the ends
/// are trimmed, and what is left is escaped as by [`terminal`].
pub fn line(s: &str) -> String {
    let collapsed = s.split_whitespace().collect::<Vec<_>>().join(" ");
    terminal(&collapsed)
}

/// Text for a Markdown report: [`line`], then `&`, `<` and `>` as HTML entities (so no tag or
/// comment can hide or forge report lines) and `|` escaped (so a table keeps its columns).
pub fn markdown(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 8);
    for c in line(s).chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '|' => out.push_str("\\|"),
            c => out.push(c),
        }
    }
    out
}

/// Text for an HTML report (element content or a quoted attribute value): [`line`], then `&`,
/// `<`, `>`, `"` and `'` as character references.
pub fn html(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 8);
    for c in line(s).chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// At most `max` characters of `s` (made safe by [`terminal`]); a longer value is cut and
/// says how long it was.
pub fn clip(s: &str, max: usize) -> String {
    let count = s.chars().count();
    if count <= max {
        return terminal(s);
    }
    let head: String = s.chars().take(max).collect();
    format!("{}… ({count} characters)", terminal(&head))
}

/// How many characters of a bad value a message shows.
pub const SHOWN: usize = 80;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn terminal_escapes_ansi_nul_and_bidi() {
        assert_eq!(
            terminal("a\u{1b}[2K\rverified\u{0}\u{202e}b"),
            "a\\u{1b}[2K\\rverified\\u{0}\\u{202e}b"
        );
        assert_eq!(terminal("x\ny\u{85}"), "x\\ny\\u{85}");
        assert_eq!(
            terminal("plain text, ünïcode ≥ 1"),
            "plain text, ünïcode ≥ 1"
        );
    }

    #[test]
    fn output_holds_no_unsafe_character() {
        let nasty: String = (0u32..0x300)
            .chain(0x2000..0x2070)
            .filter_map(char::from_u32)
            .collect();
        for f in [terminal, line, markdown, html] {
            assert!(!f(&nasty).chars().any(is_unsafe));
        }
    }

    #[test]
    fn line_collapses_breaks() {
        assert_eq!(
            line("  A title\n\n# forged\r\n  end "),
            "A title # forged end"
        );
    }

    #[test]
    fn markdown_escapes_html_and_pipes() {
        assert_eq!(
            markdown("<script>x</script> & <!-- a | b\n**Integrity: sealed**"),
            "&lt;script&gt;x&lt;/script&gt; &amp; &lt;!-- a \\| b **Integrity: sealed**"
        );
        assert_eq!(
            markdown("<img src=x onerror=alert(1)>"),
            "&lt;img src=x onerror=alert(1)&gt;"
        );
    }

    #[test]
    fn html_escapes_markup_and_quotes() {
        assert_eq!(
            html("<script>alert('x')</script> & \"q\" <!--\n-->"),
            "&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &quot;q&quot; &lt;!-- --&gt;"
        );
        assert!(!html("a\u{202e}b\u{1b}[2K").chars().any(is_unsafe));
    }

    #[test]
    fn clip_cuts_long_values_and_says_so() {
        let long = "x".repeat(1000);
        assert_eq!(clip(&long, 5), "xxxxx… (1000 characters)");
        assert_eq!(clip("short", 80), "short");
    }
}
