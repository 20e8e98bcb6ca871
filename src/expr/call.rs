//! The built-in functions: their names, arities and argument rules, and the suggestions
//! given for an unknown function name.
//!
//! Invariants: a call node is built only with the right number of arguments, and a `lag`
//! node only with a whole-number shift of at least 1, written as a literal.

use super::node::Node;
use super::{Expr, ExprError, Func};

/// Every function, with how it is called (for messages).
const FUNCTIONS: [(&str, &str); 8] = [
    ("ln", "ln(x)"),
    ("exp", "exp(x)"),
    ("sqrt", "sqrt(x)"),
    ("abs", "abs(x)"),
    ("lag", "lag(x, k)"),
    ("diff", "diff(x)"),
    ("is_missing", "is_missing(x)"),
    ("if", "if(condition, a, b)"),
];

/// The largest shift `lag` accepts.
const MAX_LAG: f64 = u32::MAX as f64;

/// Refuses, at `offset`, a function name that is not built in.
///
/// # Errors
/// The name is unknown; the message names it and the closest known function.
pub(crate) fn check_known(name: &str, offset: usize) -> Result<(), ExprError> {
    if FUNCTIONS.iter().any(|(known, _)| *known == name) {
        return Ok(());
    }
    Err(ExprError::at(offset, unknown_message(name)))
}

/// Builds the call `name(args)`; `offset` is where `name` starts, each argument comes with
/// the offset where it starts.
///
/// # Errors
/// The wrong number of arguments, a `lag` shift that is not a positive whole-number literal,
/// or a tree too deep.
pub(crate) fn build_call(
    name: &str,
    offset: usize,
    args: Vec<(Node, usize)>,
) -> Result<Node, ExprError> {
    let usage = usage(name);
    let want = usage.matches(',').count() + 1;
    if args.len() != want {
        return Err(ExprError::at(
            offset,
            format!(
                "`{name}` takes {} ({usage}) but was given {}",
                count(want),
                count(args.len())
            ),
        ));
    }
    let mut args = args.into_iter();
    let mut next = || args.next();
    match (name, next(), next(), next()) {
        ("lag", Some((x, _)), Some((k, k_at)), None) => lag(x, k, k_at),
        ("if", Some((c, _)), Some((a, _)), Some((b, _))) => {
            let depths = [c.depth, a.depth, b.depth];
            let expr = Expr::If {
                cond: Box::new(c.expr),
                then: Box::new(a.expr),
                otherwise: Box::new(b.expr),
            };
            Node::over(offset, &depths, expr)
        }
        (_, Some((x, _)), None, None) => {
            let func = unary(name, offset)?;
            let depth = x.depth;
            let arg = Box::new(x.expr);
            Node::over(offset, &[depth], Expr::Call { func, arg })
        }
        _ => Err(ExprError::at(offset, unknown_message(name))),
    }
}

/// `lag(x, k)`, checking that `k` (starting at `offset`) is a literal whole number ≥ 1.
fn lag(x: Node, k: Node, offset: usize) -> Result<Node, ExprError> {
    let shift = match k.expr {
        Expr::Number(v) if v >= 1.0 && v.fract() == 0.0 && v <= MAX_LAG => v as usize,
        other => {
            return Err(ExprError::at(
                offset,
                format!(
                    "the shift `k` in `lag(x, k)` must be a whole number of at least 1 \
                     written as a literal, such as `1` or `4`; found `{other}`"
                ),
            ))
        }
    };
    let depth = x.depth;
    let arg = Box::new(x.expr);
    Node::over(offset, &[depth], Expr::Lag { arg, k: shift })
}

/// The one-argument function called `name`.
fn unary(name: &str, offset: usize) -> Result<Func, ExprError> {
    [
        Func::Ln,
        Func::Exp,
        Func::Sqrt,
        Func::Abs,
        Func::Diff,
        Func::IsMissing,
    ]
    .into_iter()
    .find(|f| f.name() == name)
    .ok_or_else(|| ExprError::at(offset, unknown_message(name)))
}

fn usage(name: &str) -> &'static str {
    FUNCTIONS
        .iter()
        .find(|(known, _)| *known == name)
        .map_or("", |(_, usage)| usage)
}

fn count(n: usize) -> String {
    match n {
        1 => "1 argument".to_string(),
        n => format!("{n} arguments"),
    }
}

/// The message for an unknown function `name`, with the closest known one when it is close.
fn unknown_message(name: &str) -> String {
    if name.eq_ignore_ascii_case("log") {
        return format!("unknown function `{name}`; the natural logarithm is `ln(x)`");
    }
    let lower = name.to_ascii_lowercase();
    let (_, closest) = FUNCTIONS
        .iter()
        .map(|(known, _)| (crate::suggest::distance(&lower, known), *known))
        .min_by_key(|(d, _)| *d)
        .unwrap_or((usize::MAX, ""));
    if let Some(near) = crate::suggest::closest(&lower, FUNCTIONS.iter().map(|(k, _)| *k)) {
        format!("unknown function `{name}`; did you mean `{near}`?")
    } else {
        let all: Vec<&str> = FUNCTIONS.iter().map(|(_, usage)| *usage).collect();
        format!(
            "unknown function `{name}`; the closest known function is `{closest}`, and all \
             are: {}",
            all.join(", ")
        )
    }
}

#[cfg(test)]
mod tests {
    use super::super::parse;
    use super::*;

    fn assert_error(src: &str, offset: usize, want: &str) {
        let e = parse(src).expect_err("should be refused");
        assert_eq!(e.offset, Some(offset), "source `{src}`: {e}");
        assert!(e.message.contains(want), "source `{src}`: {e}");
    }

    #[test]
    fn edit_distance_of_known_pairs() {
        // Textbook Levenshtein examples (from memory), checked by hand.
        assert_eq!(crate::suggest::distance("kitten", "sitting"), 3);
        assert_eq!(crate::suggest::distance("flaw", "lawn"), 2);
        assert_eq!(crate::suggest::distance("", "abc"), 3);
        assert_eq!(crate::suggest::distance("abc", ""), 3);
        assert_eq!(crate::suggest::distance("sqrt", "sqrt"), 0);
        assert_eq!(crate::suggest::distance("sqr", "sqrt"), 1);
    }

    #[test]
    fn unknown_functions_name_the_closest_known_one() {
        assert_error("sqr(x)", 0, "unknown function `sqr`; did you mean `sqrt`?");
        assert_error("1 + Ln(x)", 4, "unknown function `Ln`; did you mean `ln`?");
        assert_error("is_mising(x)", 0, "did you mean `is_missing`?");
        assert_error("dif(x)", 0, "did you mean `diff`?");
        assert_error("log(x)", 0, "the natural logarithm is `ln(x)`");
        assert_error(
            "regress(y)",
            0,
            "unknown function `regress`; the closest known function is",
        );
        assert_error("regress(y)", 0, "lag(x, k), diff(x), is_missing(x)");
    }

    #[test]
    fn arity_is_checked() {
        assert_error(
            "ln(x, 2)",
            0,
            "`ln` takes 1 argument (ln(x)) but was given 2 arguments",
        );
        assert_error(
            "2 * lag(x)",
            4,
            "`lag` takes 2 arguments (lag(x, k)) but was given 1",
        );
        assert_error(
            "if(a, b)",
            0,
            "`if` takes 3 arguments (if(condition, a, b))",
        );
        assert_error("diff()", 0, "but was given 0 arguments");
        assert_error("sqrt(a, b, c)", 0, "was given 3 arguments");
    }

    #[test]
    fn lag_shift_must_be_a_positive_whole_literal() {
        for (src, offset) in [
            ("lag(x, 0)", 7),
            ("lag(x, -1)", 7),
            ("lag(x, 1.5)", 7),
            ("lag(x, k)", 7),
            ("lag(x,1 + 1)", 6),
            ("lag(x, 1e10)", 7),
        ] {
            assert_error(src, offset, "must be a whole number of at least 1");
        }
        assert_error("lag(x, -1)", 7, "found `-1`");
    }

    #[test]
    fn lag_accepts_any_expression_to_shift() {
        let want = Expr::Lag {
            arg: Box::new(Expr::Call {
                func: Func::Ln,
                arg: Box::new(Expr::Name("x".into())),
            }),
            k: 3,
        };
        assert_eq!(parse("lag(ln(x), 3)"), Ok(want));
        assert_eq!(
            parse("lag ( x , 3.0 )"),
            Ok(Expr::Lag {
                arg: Box::new(Expr::Name("x".into())),
                k: 3
            })
        );
    }

    #[test]
    fn every_function_parses_to_its_node() {
        for func in [
            Func::Ln,
            Func::Exp,
            Func::Sqrt,
            Func::Abs,
            Func::Diff,
            Func::IsMissing,
        ] {
            let src = format!("{}(y)", func.name());
            let want = Expr::Call {
                func,
                arg: Box::new(Expr::Name("y".into())),
            };
            assert_eq!(parse(&src), Ok(want), "source {src}");
        }
        let name = |n: &str| Box::new(Expr::Name(n.into()));
        let want = Expr::If {
            cond: name("c"),
            then: name("a"),
            otherwise: name("b"),
        };
        assert_eq!(parse("if(c, a, b)"), Ok(want));
    }
}
