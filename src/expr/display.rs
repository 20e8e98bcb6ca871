//! Canonical text of an expression tree.
//!
//! Invariants: single spaces around infix operators and after commas, none inside
//! parentheses; parentheses exactly where the grammar needs them to keep the tree's shape;
//! for every tree `e` produced by [`parse`](super::parse), `parse(&e.to_string()) == Ok(e)`.
//! Numbers use Rust's shortest round-trip form, in exponent notation when very large or
//! very small.

use std::fmt;

use super::{prec, BinOp, Expr};

/// A name that reads back as itself without backticks: an identifier that is not reserved.
fn is_bare_name(name: &str) -> bool {
    name.starts_with(|c: char| c.is_ascii_alphabetic() || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
        && !super::parse_error::is_reserved(name)
}

impl fmt::Display for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Expr::Number(v) => write_number(f, *v),
            Expr::Name(name) if is_bare_name(name) => f.write_str(name),
            Expr::Name(name) => write!(f, "`{name}`"),
            Expr::Neg(a) => {
                f.write_str("-")?;
                operand(f, a, prec::NEG)
            }
            Expr::Not(a) => {
                f.write_str("not ")?;
                operand(f, a, prec::NOT)
            }
            Expr::Binary { op, left, right } => {
                let (left_min, right_min) = operand_levels(*op);
                operand(f, left, left_min)?;
                write!(f, " {} ", op.symbol())?;
                operand(f, right, right_min)
            }
            Expr::Call { func, arg } => write!(f, "{}({arg})", func.name()),
            Expr::Lag { arg, k } => write!(f, "lag({arg}, {k})"),
            Expr::If {
                cond,
                then,
                otherwise,
            } => write!(f, "if({cond}, {then}, {otherwise})"),
            Expr::Draw { draw, args } => {
                write!(f, "{}(", draw.name())?;
                for (i, a) in args.iter().enumerate() {
                    if i > 0 {
                        f.write_str(", ")?;
                    }
                    write!(f, "{a}")?;
                }
                f.write_str(")")
            }
        }
    }
}

/// The lowest grammar level each operand of `op` may have without parentheses.
fn operand_levels(op: BinOp) -> (u8, u8) {
    let p = op.precedence();
    match p {
        prec::CMP => (prec::CMP + 1, prec::CMP + 1),
        prec::POW => (prec::ATOM, prec::NEG),
        _ => (p, p + 1),
    }
}

/// Writes `e`, in parentheses when its level is below `min`.
fn operand(f: &mut fmt::Formatter<'_>, e: &Expr, min: u8) -> fmt::Result {
    if level(e) < min {
        write!(f, "({e})")
    } else {
        write!(f, "{e}")
    }
}

/// The grammar level at which `e` is written.
fn level(e: &Expr) -> u8 {
    match e {
        Expr::Binary { op, .. } => op.precedence(),
        Expr::Neg(_) => prec::NEG,
        Expr::Number(v) if v.is_sign_negative() => prec::NEG,
        Expr::Not(_) => prec::NOT,
        _ => prec::ATOM,
    }
}

fn write_number(f: &mut fmt::Formatter<'_>, v: f64) -> fmt::Result {
    let size = v.abs();
    if size != 0.0 && !(1e-5..1e16).contains(&size) {
        write!(f, "{v:e}")
    } else {
        write!(f, "{v}")
    }
}

#[cfg(test)]
mod tests {
    use super::super::{parse, Func};
    use super::*;

    fn canonical(src: &str) -> String {
        parse(src).expect("valid").to_string()
    }

    #[test]
    fn canonical_text_has_single_spaces_and_needed_parentheses_only() {
        let cases = [
            ("a+b*c", "a + b * c"),
            ("(a+b)*c", "(a + b) * c"),
            ("((a))", "a"),
            ("a-(b-c)", "a - (b - c)"),
            ("(a-b)-c", "a - b - c"),
            ("a/(b*c)", "a / (b * c)"),
            ("2^3^2", "2 ^ 3 ^ 2"),
            ("(2^3)^2", "(2 ^ 3) ^ 2"),
            ("-x^2", "-x ^ 2"),
            ("(-x)^2", "(-x) ^ 2"),
            ("2^-x", "2 ^ -x"),
            ("- - x", "--x"),
            ("a - -b", "a - -b"),
            ("-(a+b)", "-(a + b)"),
            ("(a<b)<c", "(a < b) < c"),
            ("a<(b<c)", "a < (b < c)"),
            ("not a<b", "not a < b"),
            ("(not a)<b", "(not a) < b"),
            ("not(a and b)", "not (a and b)"),
            ("a and not b or c", "a and not b or c"),
            ("a and (b or c)", "a and (b or c)"),
            ("a + (not b)", "a + (not b)"),
        ];
        for (src, want) in cases {
            assert_eq!(canonical(src), want, "source {src}");
        }
    }

    #[test]
    fn calls_and_numbers_print_canonically() {
        let cases = [
            ("ln( kwh+1 )", "ln(kwh + 1)"),
            ("lag(x,2)", "lag(x, 2)"),
            ("lag(x, 2e0)", "lag(x, 2)"),
            ("if(a>1,b,-c)", "if(a > 1, b, -c)"),
            ("is_missing(x)+diff(y)", "is_missing(x) + diff(y)"),
            ("1.50", "1.5"),
            (".5", "0.5"),
            ("1e-3", "0.001"),
            ("2.5E+4", "25000"),
            ("1e-7", "1e-7"),
            ("3e20", "3e20"),
        ];
        for (src, want) in cases {
            assert_eq!(canonical(src), want, "source {src}");
        }
    }

    #[test]
    fn display_round_trips_through_parse() {
        let sources = [
            "1",
            "x",
            "ln(kwh + 1)",
            "roof_m2 ^ 2",
            "storeys <= 4",
            "a - b - c - d",
            "a - (b - (c - d))",
            "a / b / c * d",
            "a ^ b ^ c ^ d",
            "((a ^ b) ^ c) ^ d",
            "-(-(-x))",
            "-x ^ -y ^ 2",
            "(-x) ^ (-y)",
            "not not (a or b) and c",
            "(a or b) and (c or d)",
            "a or b and c or d",
            "(a == b) != (c >= d)",
            "(a + b < c) == (d > e)",
            "if(is_missing(x), 0, x) * 2",
            "lag(diff(ln(x)), 3) - abs(sqrt(y) - exp(-z))",
            "if(a, if(b, 1, 2), if(c, 3, 4 ^ 5))",
            "0.1 + 0.2 * 1e300 - 123456789.125",
            "1e-310 + 4.9e-324",
            "(not a) + (b < c) * (d and e)",
            "2 ^ (not x) - (a or b) ^ 2",
            "x_1 * _y / Z9",
        ];
        for src in sources {
            let tree = parse(src).expect("valid");
            let text = tree.to_string();
            assert_eq!(parse(&text), Ok(tree.clone()), "source {src}, text {text}");
            assert_eq!(parse(&text).expect("valid").to_string(), text, "stable");
        }
    }

    /// A deterministic pseudo-random tree of the kind `parse` returns (64-bit LCG,
    /// constants of Knuth's MMIX).
    fn random_tree(state: &mut u64, depth: usize) -> Expr {
        let mut next = |m: u64| {
            *state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (*state >> 33) % m
        };
        let pick = if depth == 0 { next(2) } else { next(8) };
        let ops = [
            BinOp::Or,
            BinOp::And,
            BinOp::Lt,
            BinOp::Ge,
            BinOp::Ne,
            BinOp::Add,
            BinOp::Sub,
            BinOp::Mul,
            BinOp::Div,
            BinOp::Pow,
        ];
        let op = ops[next(ops.len() as u64) as usize];
        let k = next(5) as usize + 1;
        let leaf = next(1000) as f64 / 8.0;
        let sub = |state: &mut u64| Box::new(random_tree(state, depth.saturating_sub(1)));
        match pick {
            0 => Expr::Number(leaf),
            1 => Expr::Name(["x", "y_2", "ln", "_z", "floor area", "and"][k % 6].to_string()),
            2 => Expr::Neg(sub(state)),
            3 => Expr::Not(sub(state)),
            4 => Expr::Lag { arg: sub(state), k },
            5 => Expr::Call {
                func: Func::Abs,
                arg: sub(state),
            },
            6 => Expr::If {
                cond: sub(state),
                then: sub(state),
                otherwise: sub(state),
            },
            _ => Expr::Binary {
                op,
                left: sub(state),
                right: sub(state),
            },
        }
    }

    #[test]
    fn generated_trees_round_trip() {
        let mut state = 20260501;
        for _ in 0..2000 {
            let tree = random_tree(&mut state, 6);
            let text = tree.to_string();
            assert_eq!(parse(&text), Ok(tree), "text {text}");
        }
    }
}
