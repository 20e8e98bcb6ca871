//! Splits expression source into tokens, each tagged with its 0-based character offset.
//!
//! Invariants: the token list always ends with exactly one [`Tok::End`], whose offset is the
//! source length in characters; every number token holds a finite, non-negative value.
//! Words are not classified here: keywords and function names are the parser's business.

use super::ExprError;

/// One token.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Tok {
    /// A numeric literal.
    Number(f64),
    /// A word: a name, a function name or a reserved word.
    Word(String),
    /// A name written between backticks (`` `floor area` ``): always a column or derived name.
    Quoted(String),
    /// An operator or punctuation mark, as written (`+`, `<=`, `(`, `,` ...).
    Sym(&'static str),
    /// The end of the source.
    End,
}

/// A token and the character offset where it starts.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Token {
    pub(crate) tok: Tok,
    pub(crate) offset: usize,
}

/// Operators and punctuation, two-character ones first so they win over their prefixes.
const SYMBOLS: [&str; 14] = [
    "<=", ">=", "==", "!=", "<", ">", "+", "-", "*", "/", "^", "(", ")", ",",
];

/// Tokenizes `src`.
///
/// # Errors
/// An unknown character, a malformed number or a number too large for a 64-bit float.
pub(crate) fn tokenize(src: &str) -> Result<Vec<Token>, ExprError> {
    let chars: Vec<char> = src.chars().collect();
    let mut tokens = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c.is_whitespace() {
            i += 1;
            continue;
        }
        let (tok, len) = if c.is_ascii_digit() || c == '.' {
            number(&chars, i)?
        } else if c.is_ascii_alphabetic() || c == '_' {
            word(&chars, i)
        } else if c == '`' {
            quoted(&chars, i)?
        } else {
            symbol(&chars, i)?
        };
        tokens.push(Token { tok, offset: i });
        i += len;
    }
    tokens.push(Token {
        tok: Tok::End,
        offset: chars.len(),
    });
    Ok(tokens)
}

/// Reads a word starting at `start`: `[A-Za-z_][A-Za-z0-9_]*`.
fn word(chars: &[char], start: usize) -> (Tok, usize) {
    let len = run_len(chars, start, |c| c.is_ascii_alphanumeric() || c == '_');
    (Tok::Word(chars[start..start + len].iter().collect()), len)
}

/// Reads a backtick-quoted name starting at `start` (the opening backtick).
fn quoted(chars: &[char], start: usize) -> Result<(Tok, usize), ExprError> {
    let len = run_len(chars, start + 1, |c| c != '`');
    if start + 1 + len >= chars.len() {
        return Err(ExprError::at(
            start,
            "this backtick opens a quoted name that is never closed; end the name with another `",
        ));
    }
    if len == 0 {
        return Err(ExprError::at(
            start,
            "a quoted name cannot be empty; write the column name between the backticks",
        ));
    }
    let name: String = chars[start + 1..start + 1 + len].iter().collect();
    Ok((Tok::Quoted(name), len + 2))
}

/// Reads a number starting at `start`: digits, an optional fraction, an optional exponent.
fn number(chars: &[char], start: usize) -> Result<(Tok, usize), ExprError> {
    let int_len = run_len(chars, start, |c| c.is_ascii_digit());
    let mut end = start + int_len;
    let mut frac_len = 0;
    if chars.get(end) == Some(&'.') {
        frac_len = run_len(chars, end + 1, |c| c.is_ascii_digit());
        end += 1 + frac_len;
    }
    if int_len == 0 && frac_len == 0 {
        return Err(ExprError::at(
            start,
            "a `.` must be part of a number with digits, as in `0.5` or `.5`",
        ));
    }
    if matches!(chars.get(end), Some('e' | 'E')) {
        end = exponent_end(chars, start, end)?;
    }
    let text: String = chars[start..end].iter().collect();
    match text.parse::<f64>() {
        Ok(value) if value.is_finite() => Ok((Tok::Number(value), end - start)),
        _ => Err(ExprError::at(
            start,
            format!("the number `{text}` is too large; write it in smaller units"),
        )),
    }
}

/// Given the `e` or `E` at `e_at` of the number starting at `start`, the end of the exponent.
fn exponent_end(chars: &[char], start: usize, e_at: usize) -> Result<usize, ExprError> {
    let mut digits_at = e_at + 1;
    if matches!(chars.get(digits_at), Some('+' | '-')) {
        digits_at += 1;
    }
    let len = run_len(chars, digits_at, |c| c.is_ascii_digit());
    if len == 0 {
        let text: String = chars[start..digits_at].iter().collect();
        return Err(ExprError::at(
            e_at,
            format!("the exponent of the number `{text}` needs digits, as in `1e-3` or `2.5E+4`"),
        ));
    }
    Ok(digits_at + len)
}

/// Reads an operator or punctuation mark at `start`.
fn symbol(chars: &[char], start: usize) -> Result<(Tok, usize), ExprError> {
    let rest = &chars[start..];
    if rest.starts_with(&['*', '*']) {
        return Err(ExprError::at(
            start,
            "`**` is not an operator; raise to a power with `^`",
        ));
    }
    SYMBOLS
        .iter()
        .find(|sym| {
            let len = sym.chars().count();
            rest.len() >= len && sym.chars().eq(rest[..len].iter().copied())
        })
        .map(|sym| (Tok::Sym(sym), sym.chars().count()))
        .ok_or_else(|| ExprError::at(start, unknown_symbol_message(rest[0])))
}

/// The message for a character that starts no token, with a hint for common slips.
fn unknown_symbol_message(c: char) -> String {
    match c {
        '=' => "a single `=` is not an operator; compare with `==`".to_string(),
        '!' => "`!` is not an operator; negate with `not`, or compare with `!=`".to_string(),
        '&' => "`&` is not an operator; combine conditions with `and`".to_string(),
        '|' => "`|` is not an operator; combine conditions with `or`".to_string(),
        c => format!(
            "unexpected character `{c}`; expressions use numbers, names, \
             `+ - * / ^`, comparisons, `and`, `or`, `not`, parentheses and functions"
        ),
    }
}

/// The number of consecutive characters from `start` that satisfy `pred`.
fn run_len(chars: &[char], start: usize, pred: impl Fn(char) -> bool) -> usize {
    chars
        .get(start..)
        .map_or(0, |rest| rest.iter().take_while(|&&c| pred(c)).count())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn toks(src: &str) -> Vec<(Tok, usize)> {
        tokenize(src)
            .expect("valid")
            .into_iter()
            .map(|t| (t.tok, t.offset))
            .collect()
    }

    fn error(src: &str) -> ExprError {
        tokenize(src).expect_err("invalid")
    }

    #[test]
    fn backticks_quote_any_name() {
        assert_eq!(
            toks("`floor area` + x"),
            vec![
                (Tok::Quoted("floor area".into()), 0),
                (Tok::Sym("+"), 13),
                (Tok::Word("x".into()), 15),
                (Tok::End, 16)
            ]
        );
        assert!(error("`open").message.contains("never closed"));
        assert!(error("x + ``").message.contains("cannot be empty"));
    }

    #[test]
    fn tokens_carry_their_offsets() {
        assert_eq!(
            toks("ln(x)<=2.5E+4"),
            [
                (Tok::Word("ln".into()), 0),
                (Tok::Sym("("), 2),
                (Tok::Word("x".into()), 3),
                (Tok::Sym(")"), 4),
                (Tok::Sym("<="), 5),
                (Tok::Number(25000.0), 7),
                (Tok::End, 13),
            ]
        );
    }

    #[test]
    fn offsets_count_characters_not_bytes() {
        // U+00A0 is whitespace of two bytes in UTF-8; `y` is the 4th character, 6th byte.
        assert_eq!(
            toks("\u{a0}\u{a0}x y"),
            [
                (Tok::Word("x".into()), 2),
                (Tok::Word("y".into()), 4),
                (Tok::End, 5)
            ]
        );
        assert_eq!(error("\u{a0}\u{a0}x = 1").offset, Some(4));
    }

    #[test]
    fn number_forms_of_the_plan_format() {
        for (src, want) in [
            ("1", 1.0),
            ("1.5", 1.5),
            (".5", 0.5),
            ("1e-3", 0.001),
            ("2.5E+4", 25000.0),
            ("1.", 1.0),
            ("007", 7.0),
            ("3e2", 300.0),
        ] {
            assert_eq!(toks(src)[0], (Tok::Number(want), 0), "source {src}");
        }
    }

    #[test]
    fn two_character_operators_win_over_their_prefixes() {
        let syms: Vec<Tok> = toks("< <= > >= == != - ^")
            .into_iter()
            .map(|(t, _)| t)
            .collect();
        let want = ["<", "<=", ">", ">=", "==", "!=", "-", "^"].map(Tok::Sym);
        assert_eq!(syms[..8], want);
    }

    #[test]
    fn malformed_numbers_are_errors_at_their_place() {
        let e = error("x + .");
        assert_eq!(e.offset, Some(4));
        assert!(e.message.contains("`.` must be part of a number"), "{e}");
        let e = error("2e");
        assert_eq!(e.offset, Some(1));
        assert!(
            e.message
                .contains("exponent of the number `2e` needs digits"),
            "{e}"
        );
        assert_eq!(error("1.5e+").offset, Some(3));
        let e = error("1 + 1e999");
        assert_eq!(e.offset, Some(4));
        assert!(e.message.contains("`1e999` is too large"), "{e}");
    }

    #[test]
    fn unknown_characters_get_hints() {
        let cases = [
            ("a = b", 2, "compare with `==`"),
            ("!a", 0, "negate with `not`"),
            ("a & b", 2, "with `and`"),
            ("a | b", 2, "with `or`"),
            ("x ** 2", 2, "with `^`"),
            ("x # 2", 2, "unexpected character `#`"),
            ("x % 2", 2, "unexpected character `%`"),
        ];
        for (src, offset, part) in cases {
            let e = error(src);
            assert_eq!(e.offset, Some(offset), "source {src}");
            assert!(e.message.contains(part), "source {src}: {e}");
        }
    }
}
