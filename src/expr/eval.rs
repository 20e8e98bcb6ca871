//! Column-wise evaluation of an expression tree over the rows of one table.
//!
//! Invariants: every result has exactly `n` entries; no entry is ever a non-finite number
//! (non-finite inputs and results become missing); missing values propagate as described
//! in the parent module. Recursion follows the tree, whose depth [`parse`](super::parse)
//! bounds.

use super::{BinOp, DrawSource, Expr, ExprError, Func, Values};

/// One evaluated column; `None` is missing.
type Column = Vec<Option<f64>>;

/// Looks up a column by name.
type Lookup<'l, 'a> = &'l dyn Fn(&str) -> Option<&'a dyn Values>;

impl Expr {
    /// Evaluates the expression over `n` rows.
    ///
    /// `lookup(name)` returns the named column's values (`n` of them, `None` = missing), or
    /// `None` when the table has no such column or variable. Rows are taken in the order
    /// given, which is the order `lag` and `diff` shift along.
    ///
    /// # Formula
    /// Row by row, with IEEE 754 double arithmetic; results that are not finite are
    /// missing. `lag(x, k)[i] = x[i - k]` for `i >= k`, else missing;
    /// `diff(x)[i] = x[i] - x[i - 1]`.
    ///
    /// # Errors
    /// The expression names a column `lookup` does not know, or a column whose length is
    /// not `n`.
    pub fn eval<'a>(
        &self,
        n: usize,
        lookup: &dyn Fn(&str) -> Option<&'a dyn Values>,
    ) -> Result<Vec<Option<f64>>, ExprError> {
        evaluate(self, n, lookup, None)
    }

    /// Evaluates the expression over `n` rows like [`Expr::eval`], taking the values of
    /// random draws from `source`.
    ///
    /// # Errors
    /// As [`Expr::eval`], or a draw's arguments outside its domain.
    pub fn eval_drawn<'a>(
        &self,
        n: usize,
        lookup: &dyn Fn(&str) -> Option<&'a dyn Values>,
        source: &dyn DrawSource,
    ) -> Result<Vec<Option<f64>>, ExprError> {
        evaluate(self, n, lookup, Some(source))
    }
}

fn evaluate(
    e: &Expr,
    n: usize,
    lookup: Lookup<'_, '_>,
    source: Option<&dyn DrawSource>,
) -> Result<Column, ExprError> {
    let eval = |sub: &Expr| evaluate(sub, n, lookup, source);
    Ok(match e {
        Expr::Number(v) => vec![finite(*v); n],
        Expr::Name(name) => column(name, n, lookup)?,
        Expr::Neg(a) => map(eval(a)?, |x| -x),
        Expr::Not(a) => map(eval(a)?, |x| truth(x == 0.0)),
        Expr::Binary { op, left, right } => zip(eval(left)?, eval(right)?, operator(*op)),
        Expr::Call { func, arg } => call(*func, eval(arg)?),
        Expr::Lag { arg, k } => shift(eval(arg)?, *k),
        Expr::If {
            cond,
            then,
            otherwise,
        } => choose(eval(cond)?, eval(then)?, eval(otherwise)?),
        Expr::Draw { draw, args } => {
            let source = source.ok_or_else(|| {
                ExprError::eval(format!(
                    "`{}` draws random numbers, which only a rehearsal may evaluate",
                    draw.name()
                ))
            })?;
            let values = args.iter().map(eval).collect::<Result<Vec<_>, _>>()?;
            let out = source.draw(*draw, &values, n)?;
            if out.len() != n {
                return Err(ExprError::eval(format!(
                    "`{}` gave {} values for {n} rows",
                    draw.name(),
                    out.len()
                )));
            }
            out.into_iter().map(|v| v.and_then(finite)).collect()
        }
    })
}

/// The named column, with non-finite values read as missing.
fn column(name: &str, n: usize, lookup: Lookup<'_, '_>) -> Result<Column, ExprError> {
    let values = lookup(name).ok_or_else(|| {
        ExprError::eval(format!(
            "the expression uses `{name}`, which is not a column or derived variable of \
             this table; declare it or correct the spelling"
        ))
    })?;
    if values.count() != n {
        return Err(ExprError::eval(format!(
            "column `{name}` has {} values but the table has {n} rows",
            values.count()
        )));
    }
    Ok((0..n).map(|i| values.value(i).and_then(finite)).collect())
}

/// `Some(x)` when `x` is finite, else missing.
fn finite(x: f64) -> Option<f64> {
    Some(x).filter(|x| x.is_finite())
}

/// 1 for true, 0 for false.
fn truth(b: bool) -> f64 {
    if b {
        1.0
    } else {
        0.0
    }
}

fn map(values: Column, f: impl Fn(f64) -> f64) -> Column {
    values
        .into_iter()
        .map(|x| x.and_then(|x| finite(f(x))))
        .collect()
}

fn zip(left: Column, right: Column, f: fn(f64, f64) -> f64) -> Column {
    left.into_iter()
        .zip(right)
        .map(|(a, b)| finite(f(a?, b?)))
        .collect()
}

/// The row-wise function of an infix operator.
fn operator(op: BinOp) -> fn(f64, f64) -> f64 {
    match op {
        BinOp::Or => |a, b| truth(a != 0.0 || b != 0.0),
        BinOp::And => |a, b| truth(a != 0.0 && b != 0.0),
        BinOp::Lt => |a, b| truth(a < b),
        BinOp::Le => |a, b| truth(a <= b),
        BinOp::Gt => |a, b| truth(a > b),
        BinOp::Ge => |a, b| truth(a >= b),
        BinOp::Eq => |a, b| truth(a == b),
        BinOp::Ne => |a, b| truth(a != b),
        BinOp::Add => |a, b| a + b,
        BinOp::Sub => |a, b| a - b,
        BinOp::Mul => |a, b| a * b,
        BinOp::Div => |a, b| a / b,
        BinOp::Pow => f64::powf,
    }
}

fn call(func: Func, values: Column) -> Column {
    match func {
        Func::Ln => map(values, f64::ln),
        Func::Exp => map(values, f64::exp),
        Func::Sqrt => map(values, f64::sqrt),
        Func::Abs => map(values, f64::abs),
        Func::Diff => {
            let lagged = shift(values.clone(), 1);
            zip(values, lagged, |a, b| a - b)
        }
        Func::IsMissing => values
            .into_iter()
            .map(|x| Some(truth(x.is_none())))
            .collect(),
    }
}

/// `values` moved down by `k` rows; the first `k` rows become missing.
fn shift(values: Column, k: usize) -> Column {
    let n = values.len();
    let k = k.min(n);
    let mut out = vec![None; k];
    out.extend_from_slice(&values[..n - k]);
    out
}

/// Row-wise `if`: missing where the condition is, else the chosen branch's value.
fn choose(cond: Column, then: Column, otherwise: Column) -> Column {
    cond.into_iter()
        .zip(then.into_iter().zip(otherwise))
        .map(|(c, (a, b))| if c? != 0.0 { a } else { b })
        .collect()
}

#[cfg(test)]
mod tests {
    use std::collections::HashMap;

    use super::super::parse;
    use super::*;

    /// A small table of four rows; `x` has a missing second row.
    fn table() -> HashMap<&'static str, Column> {
        HashMap::from([
            ("x", vec![Some(1.0), None, Some(3.0), Some(4.0)]),
            ("y", vec![Some(2.0), Some(0.0), Some(-1.0), Some(0.5)]),
            ("c", vec![Some(1.0), Some(0.0), None, Some(2.0)]),
            (
                "odd",
                vec![Some(f64::NAN), Some(f64::INFINITY), Some(1.0), None],
            ),
        ])
    }

    fn run(src: &str) -> Column {
        let data = table();
        let lookup = |name: &str| data.get(name).map(|c| c as &dyn Values);
        parse(src)
            .expect("valid")
            .eval(4, &lookup)
            .expect("evaluates")
    }

    /// The value of a constant expression (first row).
    fn value(src: &str) -> Option<f64> {
        run(src)[0]
    }

    #[test]
    fn arithmetic_by_hand() {
        // Exact arithmetic: every value is representable and checked by hand.
        for (src, want) in [
            ("1 + 2 * 3", 7.0),
            ("(1 + 2) * 3", 9.0),
            ("7 - 2 - 1", 4.0),
            ("8 / 4 / 2", 1.0),
            ("2 ^ 3 ^ 2", 512.0),
            ("(2 ^ 3) ^ 2", 64.0),
            ("-2 ^ 2", -4.0),
            ("(-2) ^ 2", 4.0),
            ("2 ^ -1", 0.5),
            ("3 - -3", 6.0),
            ("--3", 3.0),
            ("1.5e1 / .5", 30.0),
            ("abs(-3.5)", 3.5),
            ("sqrt(16)", 4.0),
            ("exp(0)", 1.0),
            ("ln(1)", 0.0),
            ("0 ^ 0", 1.0),
        ] {
            assert_eq!(value(src), Some(want), "source {src}");
        }
    }

    #[test]
    fn function_identities() {
        // Exact arithmetic up to rounding: ln(exp(2)) = 2 and sqrt(2)^2 = 2.
        let ln_exp = value("ln(exp(2))").expect("finite");
        assert!((ln_exp - 2.0).abs() <= 1e-15, "{ln_exp}");
        let root = value("sqrt(2) ^ 2").expect("finite");
        assert!((root - 2.0).abs() <= 4.0 * f64::EPSILON, "{root}");
    }

    #[test]
    fn precedence_changes_values() {
        // Each line would give a different value under the neighbouring precedence order.
        for (src, want) in [
            ("1 or 0 and 0", 1.0),
            ("not 0 and 0", 0.0),
            ("not 1 < 0", 1.0),
            ("1 < 2 + 3", 1.0),
            ("2 * 3 ^ 2", 18.0),
            ("2 - 3 + 4", 3.0),
            ("12 / 2 * 3", 18.0),
        ] {
            assert_eq!(value(src), Some(want), "source {src}");
        }
    }

    #[test]
    fn comparisons_and_logic_give_one_or_zero() {
        for (src, want) in [
            ("3 >= 3", 1.0),
            ("3 > 3", 0.0),
            ("2 <= 1", 0.0),
            ("2 < 3", 1.0),
            ("1 == 1 and 2 != 3", 1.0),
            ("1 == 2 or 2 == 3", 0.0),
            ("0.5 and -2", 1.0),
            ("not 0.25", 0.0),
            ("not 0", 1.0),
            ("(1 < 2) + (3 < 4)", 2.0),
        ] {
            assert_eq!(value(src), Some(want), "source {src}");
        }
    }

    #[test]
    fn columns_are_combined_row_by_row() {
        assert_eq!(run("x * 2 + y"), [Some(4.0), None, Some(5.0), Some(8.5)]);
        assert_eq!(run("y > 0"), [Some(1.0), Some(0.0), Some(0.0), Some(1.0)]);
        assert_eq!(run("7"), [Some(7.0); 4]);
    }

    #[test]
    fn lag_and_diff_shift_in_row_order() {
        assert_eq!(run("lag(x, 1)"), [None, Some(1.0), None, Some(3.0)]);
        assert_eq!(run("lag(x, 2)"), [None, None, Some(1.0), None]);
        assert_eq!(run("lag(x, 4)"), [None; 4]);
        assert_eq!(run("lag(x, 99)"), [None; 4]);
        assert_eq!(run("diff(x)"), [None, None, None, Some(1.0)]);
        assert_eq!(run("diff(y)"), [None, Some(-2.0), Some(-1.0), Some(1.5)]);
        assert_eq!(run("lag(x * 2, 1)"), [None, Some(2.0), None, Some(6.0)]);
        assert_eq!(run("lag(lag(y, 1), 1)"), run("lag(y, 2)"));
        assert_eq!(run("diff(y)"), run("y - lag(y, 1)"));
    }

    #[test]
    fn missing_in_gives_missing_out() {
        let second_missing = [Some(1.0), None, Some(1.0), Some(1.0)];
        for src in [
            "x * 0 + 1",
            "0 * x + 1",
            "x / x",
            "(x > -100) or 1",
            "1 and (x > -100)",
            "not (x < -100)",
            "abs(x) ^ 0",
            "-x == -x",
            "exp(x) > 0",
        ] {
            assert_eq!(run(src), second_missing, "source {src}");
        }
    }

    #[test]
    fn is_missing_is_never_missing() {
        assert_eq!(
            run("is_missing(x)"),
            [Some(0.0), Some(1.0), Some(0.0), Some(0.0)]
        );
        // ln(y) is missing where y <= 0 (rows 2 and 3).
        assert_eq!(
            run("is_missing(ln(y))"),
            [Some(0.0), Some(1.0), Some(1.0), Some(0.0)]
        );
        assert_eq!(
            run("not is_missing(lag(x, 1))"),
            [Some(0.0), Some(1.0), Some(0.0), Some(1.0)]
        );
    }

    #[test]
    fn if_picks_a_branch_and_only_its_missingness_counts() {
        // c = [1, 0, missing, 2]; x = [1, missing, 3, 4]; y = [2, 0, -1, 0.5].
        assert_eq!(run("if(c, x, y)"), [Some(1.0), Some(0.0), None, Some(4.0)]);
        assert_eq!(run("if(c, y, x)"), [Some(2.0), None, None, Some(0.5)]);
        assert_eq!(run("if(1, 5, x)"), [Some(5.0); 4]);
        assert_eq!(run("if(0, x, 7)"), [Some(7.0); 4]);
        assert_eq!(
            run("if(is_missing(x), 0, x)"),
            [Some(1.0), Some(0.0), Some(3.0), Some(4.0)]
        );
    }

    #[test]
    fn domain_problems_give_missing_never_nan_or_infinity() {
        for src in [
            "ln(0)",
            "ln(-1)",
            "sqrt(-1)",
            "1 / 0",
            "0 / 0",
            "-1 / 0",
            "exp(1000)",
            "0 ^ -1",
            "(-8) ^ (1 / 3)",
            "10 ^ 400",
            "1e308 * 10",
            "1e308 + 1e308",
            "if(1, 1 / 0, 0)",
        ] {
            assert_eq!(value(src), None, "source {src}");
        }
        // 1e308 - (-1e308) overflows inside diff: y = [2, 0, -1, 0.5].
        let jump = run("diff(if(y > 1, 1e308, -1e308))");
        assert_eq!(jump, [None, None, Some(0.0), Some(0.0)]);
        // Non-finite input values are read as missing.
        assert_eq!(run("odd + 0"), [None, None, Some(1.0), None]);
        assert_eq!(
            run("is_missing(odd)"),
            [Some(1.0), Some(1.0), Some(0.0), Some(1.0)]
        );
        // Missing only where the domain fails: ln(y) for y = [2, 0, -1, 0.5].
        let logs = run("ln(y)");
        assert!(logs[0].is_some() && logs[3].is_some() && logs[1..3] == [None, None]);
    }

    #[test]
    fn unknown_names_are_errors_naming_them() {
        let data = table();
        let lookup = |name: &str| data.get(name).map(|c| c as &dyn Values);
        let e = parse("x + kwh_typo")
            .expect("valid")
            .eval(4, &lookup)
            .expect_err("unknown name");
        assert_eq!(e.offset, None);
        assert!(
            e.message.contains("uses `kwh_typo`, which is not a column"),
            "{e}"
        );
    }

    #[test]
    fn a_column_of_the_wrong_length_is_an_error() {
        let short = [Some(1.0)];
        let lookup = |_: &str| Some(&short as &dyn Values);
        let e = parse("x")
            .expect("valid")
            .eval(2, &lookup)
            .expect_err("short");
        assert!(
            e.message
                .contains("column `x` has 1 values but the table has 2 rows"),
            "{e}"
        );
    }

    #[test]
    fn zero_rows_give_an_empty_column() {
        let empty: [Option<f64>; 0] = [];
        let lookup = |_: &str| Some(&empty as &dyn Values);
        let out = parse("lag(x, 2) + 1").expect("valid").eval(0, &lookup);
        assert_eq!(out, Ok(Vec::new()));
    }
}
