//! The messages of parse errors: what is wrong, where, and what to write instead.
//!
//! Invariants: every error built here carries the character offset of the token it is
//! about; tokens are named the same way in every message (see [`describe`]).

use super::lexer::{Tok, Token};
use super::{BinOp, ExprError, MAX_DEPTH};

/// Words that can never be names.
pub(crate) fn is_reserved(word: &str) -> bool {
    matches!(word, "and" | "or" | "not" | "if")
}

/// A token as named in messages.
pub(crate) fn describe(tok: &Tok) -> String {
    match tok {
        Tok::Number(v) => format!("the number `{v}`"),
        Tok::Word(w) if is_reserved(w) => format!("`{w}`"),
        Tok::Word(w) => format!("the name `{w}`"),
        Tok::Quoted(w) => format!("the quoted name `{w}`"),
        Tok::Sym(s) => format!("`{s}`"),
        Tok::End => "the end of the expression".to_string(),
    }
}

/// The error for comparison `second` following comparison `first` at `offset`.
#[cold]
#[inline(never)]
pub(crate) fn chained(offset: usize, first: BinOp, second: BinOp) -> ExprError {
    let (a, b) = (first.symbol(), second.symbol());
    ExprError::at(
        offset,
        format!(
            "comparisons cannot be chained, as in `a {a} b {b} c`; write \
             `a {a} b and b {b} c`, or add parentheses"
        ),
    )
}

/// The error for nesting past [`MAX_DEPTH`] at `offset`.
#[cold]
#[inline(never)]
pub(crate) fn too_deep(offset: usize) -> ExprError {
    ExprError::at(
        offset,
        format!(
            "the expression is more than {MAX_DEPTH} levels deep (parentheses, function \
             calls and each operator of a long chain such as `a + b + c + ...` count as a \
             level); split it into several [derive] variables, e.g. sums of at most \
             {MAX_DEPTH} terms each"
        ),
    )
}

/// The error for `what` (a `(` at `open`) that is not closed where `here` stands.
#[cold]
#[inline(never)]
pub(crate) fn unclosed(open: usize, what: &str, here: &Token) -> ExprError {
    if here.tok == Tok::End {
        return ExprError::at(open, format!("{what} is never closed; add a `)`"));
    }
    ExprError::at(
        here.offset,
        format!(
            "expected `)` to close {what} at offset {open}, found {}",
            describe(&here.tok)
        ),
    )
}

/// The error for `token` standing where a value must be, after `previous` if any.
#[cold]
#[inline(never)]
pub(crate) fn missing_operand(token: &Token, previous: Option<&Tok>) -> ExprError {
    let message = match (&token.tok, previous) {
        (Tok::End, Some(prev)) => format!(
            "the expression ends too early: a value must follow {}",
            describe(prev)
        ),
        (Tok::Word(w), _) if w == "if" => {
            "`if` is reserved: write `if(condition, a, b)`; it cannot be a name".to_string()
        }
        (Tok::Word(w), _) if w == "not" => {
            "`not` cannot stand here; put it in parentheses, as in `a + (not b)`".to_string()
        }
        (tok, _) => format!(
            "expected a value (a number, a name, a function call or `(`), found {}",
            describe(tok)
        ),
    };
    ExprError::at(token.offset, message)
}

/// The error for `token` following a complete expression.
#[cold]
#[inline(never)]
pub(crate) fn trailing(token: &Token) -> ExprError {
    let message = match &token.tok {
        Tok::Sym(")") => "this `)` has no matching `(`; remove it or add a `(`".to_string(),
        tok => format!(
            "found {} after a complete expression; an operator such as `+`, `*` or `and` \
             may be missing",
            describe(tok)
        ),
    };
    ExprError::at(token.offset, message)
}

#[cfg(test)]
mod tests {
    use super::super::parse;

    fn assert_error(src: &str, offset: usize, part: &str) {
        let e = parse(src).expect_err("should be refused");
        assert_eq!(e.offset, Some(offset), "source `{src}`: {e}");
        assert!(e.message.contains(part), "source `{src}`: {e}");
    }

    #[test]
    fn comparisons_do_not_chain() {
        assert_error("a < b < c", 6, "comparisons cannot be chained");
        assert_error("a == b != c", 7, "write `a == b and b != c`");
        assert_error("1 <= x + 1 > 0", 11, "cannot be chained");
        // With parentheses the meaning is explicit and accepted.
        assert!(parse("(a < b) < c").is_ok());
    }

    #[test]
    fn empty_input_is_refused() {
        assert_error("", 0, "the expression is empty");
        assert_error("  \t ", 0, "the expression is empty");
    }

    #[test]
    fn unbalanced_parentheses_point_at_the_culprit() {
        assert_error("(x + 1", 0, "this `(` is never closed; add a `)`");
        assert_error("2 * ((x + 1)", 4, "this `(` is never closed");
        assert_error("ln(x", 2, "the `(` of `ln(` is never closed");
        assert_error("(x + 1 2)", 7, "expected `)` to close this `(` at offset 0");
        assert_error(
            "ln(x y)",
            5,
            "expected `)` to close the `(` of `ln(` at offset 2",
        );
        assert_error("x + 1)", 5, "this `)` has no matching `(`");
    }

    #[test]
    fn trailing_text_is_refused() {
        assert_error("x y", 2, "found the name `y` after a complete expression");
        assert_error("2x", 1, "an operator such as `+`");
        assert_error("x + 1 3", 6, "found the number `3`");
        assert_error("x not", 2, "found `not` after");
    }

    #[test]
    fn missing_operands_are_named() {
        assert_error("x +", 3, "ends too early: a value must follow `+`");
        assert_error("not", 3, "a value must follow `not`");
        assert_error("* x", 0, "expected a value");
        assert_error("()", 1, "found `)`");
        assert_error("a and or b", 6, "found `or`");
        assert_error("+x", 0, "found `+`");
    }

    #[test]
    fn reserved_words_are_not_names() {
        assert_error("if + 1", 0, "`if` is reserved");
        assert_error("and", 0, "found `and`");
        assert_error("x + not y", 4, "put it in parentheses");
        assert_error("or(x)", 0, "found `or`");
    }
}
