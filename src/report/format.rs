//! Number and text formatting for reports; LaTeX escaping lives here and only here.

// `num` and `pval` live in the leaf module `crate::format`, so the analysis can word its
// messages with them without depending on the report.
pub use crate::format::{num, pval};

/// A p-value in running text: `p = 0.0123`, or `p < 1e-300` below what is printed. Notation
/// for a number, like [`num`], so it stays with the number formatting rather than in the
/// templates.
pub fn p_is(p: f64) -> String {
    let shown = pval(p);
    if shown.starts_with('<') {
        format!("p {shown}")
    } else {
        format!("p = {shown}")
    }
}

/// Escape text for LaTeX. Characters with a special meaning are escaped; common symbols
/// outside Latin-1 get LaTeX equivalents; any other such character becomes `?` so the
/// document always compiles with pdflatex.
pub fn tex(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    let mut code = false;
    let chars: Vec<char> = s.chars().collect();
    let mut skip = false;
    for (i, &c) in chars.iter().enumerate() {
        if std::mem::take(&mut skip) {
            continue;
        }
        // A minus sign before a number (not a hyphen inside a word or date) is a true minus.
        let negative_number = c == '-'
            && chars.get(i + 1).is_some_and(char::is_ascii_digit)
            && (i == 0 || !chars[i - 1].is_alphanumeric());
        match c {
            '-' if negative_number && !code => out.push_str("$-$"),
            // Markdown-style `code` is set in monospace; an unclosed one ends with the text.
            '`' => {
                out.push_str(if code { "}" } else { "\\texttt{" });
                code = !code;
            }
            '\n' => out.push('\n'),
            '−' if chars.get(i + 1) == Some(&'∞') => {
                out.push_str("$-\\infty$");
                skip = true;
            }
            c => match tex_symbol(c) {
                Some(t) => out.push_str(t),
                None if c.is_control() => {}
                None if (c as u32) <= 0xFF => out.push(c),
                None => out.push('?'),
            },
        }
    }
    if code {
        out.push('}');
    }
    out
}

/// The LaTeX for a character that is special in LaTeX or a symbol outside Latin-1 with a
/// LaTeX equivalent; `None` for any other character.
fn tex_symbol(c: char) -> Option<&'static str> {
    Some(match c {
        '\\' => "\\textbackslash{}",
        '&' => "\\&",
        '%' => "\\%",
        '$' => "\\$",
        '#' => "\\#",
        '_' => "\\_",
        '{' => "\\{",
        '}' => "\\}",
        '~' => "\\textasciitilde{}",
        '^' => "\\textasciicircum{}",
        '<' => "\\textless{}",
        '>' => "\\textgreater{}",
        '|' => "\\textbar{}",
        '"' => "\\textquotedbl{}",
        '≥' => "$\\geq$",
        '≤' => "$\\leq$",
        '≠' => "$\\neq$",
        '−' => "$-$",
        '–' => "--",
        '—' => "---",
        '²' => "\\textsuperscript{2}",
        '±' => "$\\pm$",
        '×' => "$\\times$",
        '‘' | '’' => "'",
        '“' | '”' => "\\textquotedbl{}",
        '…' => "\\ldots{}",
        '∪' => "$\\cup$",
        '∞' => "$\\infty$",
        '∅' => "$\\emptyset$",
        'κ' => "$\\kappa$",
        'τ' => "$\\tau$",
        'χ' => "$\\chi$",
        'β' => "$\\beta$",
        '→' => "$\\rightarrow$",
        '′' => "$'$",
        _ => return None,
    })
}

/// [`tex`] for long unbroken values (fingerprints, paths) in a narrow column: a line may break
/// after every `/` and after each 16 characters without a space.
pub fn tex_breakable(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + s.len() / 8);
    let mut run = 0;
    for c in s.chars() {
        out.push_str(&tex(&c.to_string()));
        run = if c.is_whitespace() { 0 } else { run + 1 };
        if c == '/' || run % 16 == 0 && run > 0 {
            out.push_str("\\allowbreak{}");
        }
    }
    out
}

/// A confidence set as text: pieces joined by ∪, unbounded ends as ∞. Interval notation
/// (with the glosses "(empty)" and "(the whole line)" that belong to it), placed as a value
/// by every cell and sentence that shows a set, so it stays with the number formatting.
pub fn set_text(pieces: &[crate::results::SetPiece]) -> String {
    if pieces.is_empty() {
        return "∅ (empty)".to_string();
    }
    if let [p] = pieces {
        if p.lower.is_none() && p.upper.is_none() {
            return "(−∞, ∞) (the whole line)".to_string();
        }
    }
    pieces
        .iter()
        .map(|p| match (p.lower, p.upper) {
            (Some(a), Some(b)) => format!("[{}, {}]", num(a), num(b)),
            (None, Some(b)) => format!("(−∞, {}]", num(b)),
            (Some(a), None) => format!("[{}, ∞)", num(a)),
            (None, None) => "(−∞, ∞)".to_string(),
        })
        .collect::<Vec<_>>()
        .join(" ∪ ")
}

/// Text for the HTML report: [`crate::escape::html`], then Markdown-style `code` spans as
/// `<code>` elements (backticks survive escaping, so plan text cannot open any other element).
pub fn html(s: &str) -> String {
    let escaped = crate::escape::html(s);
    let mut out = String::with_capacity(escaped.len() + 16);
    let mut open = false;
    for c in escaped.chars() {
        if c == '`' {
            out.push_str(if open { "</code>" } else { "<code>" });
            open = !open;
        } else {
            out.push(c);
        }
    }
    if open {
        out.push_str("</code>");
    }
    out
}

/// Escape text for the Markdown report (see [`crate::escape::markdown`]): one line, no
/// control or bidirectional-formatting character, HTML and table pipes escaped.
pub fn md(s: &str) -> String {
    crate::escape::markdown(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers() {
        assert_eq!(num(-1.90123), "-1.901");
        assert_eq!(num(0.000431), "0.000431");
        assert_eq!(num(-0.00000957), "-0.00000957");
        assert_eq!(num(4.2e-7), "4.200e-7");
        assert_eq!(p_is(0.0), "p < 1e-300");
        assert_eq!(p_is(0.5), "p = 0.5000");
        assert_eq!(tex("[-0.874, -1]"), "[$-$0.874, $-$1]");
        assert_eq!(tex("2026-05-01 n - k"), "2026-05-01 n - k");
        assert_eq!(num(2.5e7), "2.500e7");
        assert_eq!(num(f64::NAN), "n/a");
        assert_eq!(pval(0.0), "< 1e-300");
        assert_eq!(pval(1e-310), "< 1e-300");
        assert_eq!(pval(0.01234), "0.0123");
        assert_eq!(pval(3.2e-7), "3.20e-7");
    }

    #[test]
    fn html_text_marks_code_and_escapes() {
        assert_eq!(
            html("`a<b>` & `c"),
            "<code>a&lt;b&gt;</code> &amp; <code>c</code>"
        );
    }

    #[test]
    fn tex_escapes_specials() {
        assert_eq!(tex("a_b & 50% #1 $x$ {y} ~ ^ \\"), "a\\_b \\& 50\\% \\#1 \\$x\\$ \\{y\\} \\textasciitilde{} \\textasciicircum{} \\textbackslash{}");
        assert_eq!(tex("F ≥ 10 – ok 😀"), "F $\\geq$ 10 -- ok ?");
        assert_eq!(md("a|b"), "a\\|b");
        assert_eq!(
            tex("(−∞, 1] ∪ [2, ∞)"),
            "($-\\infty$, 1] $\\cup$ [2, $\\infty$)"
        );
    }

    /// Each shape of a confidence set prints distinctly.
    #[test]
    fn set_shapes_print() {
        use crate::results::SetPiece;
        let p = |lower, upper| SetPiece { lower, upper };
        assert_eq!(set_text(&[]), "∅ (empty)");
        assert_eq!(set_text(&[p(None, None)]), "(−∞, ∞) (the whole line)");
        assert_eq!(set_text(&[p(Some(-1.0), Some(2.0))]), "[-1.000, 2.000]");
        assert_eq!(
            set_text(&[p(None, Some(-1.0)), p(Some(2.0), None)]),
            "(−∞, -1.000] ∪ [2.000, ∞)"
        );
    }
}
