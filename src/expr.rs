//! The expression language of plan keys `[derive]` and `sample` (plan format, section 2).
//!
//! An expression is parsed once into an [`Expr`] tree and evaluated column-wise over the
//! rows of one table. Values are `Option<f64>`; `None` is a missing value.
//!
//! Grammar, precedence from lowest to highest:
//!
//! | level | forms | associativity |
//! | --- | --- | --- |
//! | 1 | `a or b` | left |
//! | 2 | `a and b` | left |
//! | 3 | `not a` | prefix |
//! | 4 | `a < b`, `<=`, `>`, `>=`, `==`, `!=` | none: `a < b < c` is rejected |
//! | 5 | `a + b`, `a - b` | left |
//! | 6 | `a * b`, `a / b` | left |
//! | 7 | `-a` | prefix |
//! | 8 | `a ^ b` | right: `2 ^ 3 ^ 2` is `2 ^ (3 ^ 2)`, `-x ^ 2` is `-(x ^ 2)` |
//!
//! Operands are numbers (`1`, `1.5`, `.5`, `1e-3`, `2.5E+4`), names
//! (`[A-Za-z_][A-Za-z0-9_]*`, except the reserved words `and`, `or`, `not`, `if`),
//! parentheses, and function calls: `ln`, `exp`, `sqrt`, `abs`, `diff`, `is_missing` (one
//! argument each), `lag(x, k)` with `k` a positive whole-number literal, and
//! `if(cond, a, b)`. A name is read as a function only when `(` follows it, so a column may
//! be called `ln`.
//!
//! Invariants of evaluation ([`Expr::eval`]):
//! - The result has exactly `n` entries and never holds a non-finite number: a domain
//!   problem (`ln` or `sqrt` outside its domain, division by zero, overflow in `exp`, `^`,
//!   `*` or `+`, `0 ^ -1`, `(-8) ^ 0.5`) gives a missing value, never NaN or infinity. A
//!   non-finite number in an input column is read as missing too.
//! - Missing in gives missing out, for every operator and function (including `and` and
//!   `or`), except `is_missing(x)`, which is always 0 or 1, and `if(c, a, b)`, which is
//!   missing when `c` is, and otherwise is the chosen branch's value, missing or not.
//! - Comparisons, `and`, `or`, `not` and `is_missing` give 1 or 0; a value is true when it
//!   is not 0. `0 ^ 0` is 1, as IEEE 754 `pow` defines it.
//! - `lag(x, k)` evaluates `x` and shifts it down by `k` rows in table order (the caller
//!   sorts rows by the table's `order_by` first); the first `k` rows are missing.
//!   `diff(x)` is `x - lag(x, 1)`.
//!
//! Parse errors carry the 0-based character offset of the problem. Nesting deeper than
//! [`MAX_DEPTH`] levels is rejected (a chain `a + b + ...` of more than `MAX_DEPTH` terms
//! counts, since it builds a tree that deep), so no recursion here can exhaust the stack:
//! at the cap, an unoptimised build parses, prints and evaluates within a 2 MiB thread
//! stack (tested). [`Expr`]'s `Display` writes a canonical text that parses back to the
//! same tree for every tree [`parse`] returns.

mod call;
mod display;
mod draw;
mod eval;
mod lexer;
mod node;
mod parse_error;
mod parser;

use std::collections::BTreeSet;

pub use draw::{Draw, DrawSource};
pub use parser::{parse, parse_random};

/// A column an expression reads: its cells by row, `None` for a missing one.
pub trait Values {
    /// The number of cells.
    fn count(&self) -> usize;
    /// The cell in row `i`, `None` when missing.
    fn value(&self, i: usize) -> Option<f64>;
}

impl<const N: usize> Values for [Option<f64>; N] {
    fn count(&self) -> usize {
        N
    }

    fn value(&self, i: usize) -> Option<f64> {
        self[i]
    }
}

impl Values for Vec<Option<f64>> {
    fn count(&self) -> usize {
        self.len()
    }

    fn value(&self, i: usize) -> Option<f64> {
        self[i]
    }
}

/// The deepest nesting [`parse`] accepts: of parentheses and prefix operators while
/// parsing, and of the resulting tree.
pub const MAX_DEPTH: usize = 200;

/// A parsed expression (abstract syntax tree).
#[derive(Debug, Clone, PartialEq)]
pub enum Expr {
    /// A numeric literal; finite and non-negative when produced by [`parse`].
    Number(f64),
    /// A column or derived variable of the table.
    Name(String),
    /// Unary minus, `-a`.
    Neg(Box<Expr>),
    /// Logical negation, `not a`.
    Not(Box<Expr>),
    /// An infix operator, `left op right`.
    Binary {
        /// The operator.
        op: BinOp,
        /// The left operand.
        left: Box<Expr>,
        /// The right operand.
        right: Box<Expr>,
    },
    /// A one-argument function, `func(arg)`.
    Call {
        /// The function.
        func: Func,
        /// Its argument.
        arg: Box<Expr>,
    },
    /// `lag(arg, k)`: `arg` shifted down by `k` rows.
    Lag {
        /// The expression to shift.
        arg: Box<Expr>,
        /// The number of rows to shift by; at least 1.
        k: usize,
    },
    /// `if(cond, then, otherwise)`.
    If {
        /// The condition; true when not 0.
        cond: Box<Expr>,
        /// The value where the condition is true.
        then: Box<Expr>,
        /// The value where the condition is false.
        otherwise: Box<Expr>,
    },
    /// A random draw (rehearsal data-generating processes only; see [`parse_random`]).
    Draw {
        /// The draw function.
        draw: Draw,
        /// Its arguments, in order.
        args: Vec<Expr>,
    },
}

/// An infix operator.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BinOp {
    /// `or`
    Or,
    /// `and`
    And,
    /// `<`
    Lt,
    /// `<=`
    Le,
    /// `>`
    Gt,
    /// `>=`
    Ge,
    /// `==`
    Eq,
    /// `!=`
    Ne,
    /// `+`
    Add,
    /// `-`
    Sub,
    /// `*`
    Mul,
    /// `/`
    Div,
    /// `^`
    Pow,
}

/// A function of one argument.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Func {
    /// Natural logarithm.
    Ln,
    /// Exponential.
    Exp,
    /// Square root.
    Sqrt,
    /// Absolute value.
    Abs,
    /// First difference in row order, `x - lag(x, 1)`.
    Diff,
    /// 1 where the argument is missing, else 0.
    IsMissing,
}

/// A parse or evaluation error.
///
/// `offset` is the 0-based character offset into the source where the problem is (parse
/// errors only); `message` is a plain sentence saying what is wrong and what to do.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{message}")]
pub struct ExprError {
    /// What is wrong and what to do about it.
    pub message: String,
    /// Character offset of the problem in the source, for parse errors.
    pub offset: Option<usize>,
}

impl ExprError {
    /// A parse error at character `offset`.
    pub(crate) fn at(offset: usize, message: impl Into<String>) -> Self {
        ExprError {
            message: message.into(),
            offset: Some(offset),
        }
    }

    /// An evaluation error, which has no place in the source.
    pub(crate) fn eval(message: impl Into<String>) -> Self {
        ExprError {
            message: message.into(),
            offset: None,
        }
    }
}

impl Func {
    /// The function's name as written in expressions.
    pub fn name(self) -> &'static str {
        match self {
            Func::Ln => "ln",
            Func::Exp => "exp",
            Func::Sqrt => "sqrt",
            Func::Abs => "abs",
            Func::Diff => "diff",
            Func::IsMissing => "is_missing",
        }
    }
}

/// Binding strength of each grammar level; a higher number binds tighter.
pub(crate) mod prec {
    /// `or`
    pub const OR: u8 = 1;
    /// `and`
    pub const AND: u8 = 2;
    /// prefix `not`
    pub const NOT: u8 = 3;
    /// comparisons (non-associative)
    pub const CMP: u8 = 4;
    /// `+ -`
    pub const ADD: u8 = 5;
    /// `* /`
    pub const MUL: u8 = 6;
    /// prefix `-`
    pub const NEG: u8 = 7;
    /// `^` (right-associative)
    pub const POW: u8 = 8;
    /// numbers, names, calls, parentheses
    pub const ATOM: u8 = 9;
}

impl BinOp {
    /// The operator as written in expressions.
    pub fn symbol(self) -> &'static str {
        match self {
            BinOp::Or => "or",
            BinOp::And => "and",
            BinOp::Lt => "<",
            BinOp::Le => "<=",
            BinOp::Gt => ">",
            BinOp::Ge => ">=",
            BinOp::Eq => "==",
            BinOp::Ne => "!=",
            BinOp::Add => "+",
            BinOp::Sub => "-",
            BinOp::Mul => "*",
            BinOp::Div => "/",
            BinOp::Pow => "^",
        }
    }

    /// The grammar level of the operator (see [`prec`]).
    pub(crate) fn precedence(self) -> u8 {
        match self {
            BinOp::Or => prec::OR,
            BinOp::And => prec::AND,
            BinOp::Lt | BinOp::Le | BinOp::Gt | BinOp::Ge | BinOp::Eq | BinOp::Ne => prec::CMP,
            BinOp::Add | BinOp::Sub => prec::ADD,
            BinOp::Mul | BinOp::Div => prec::MUL,
            BinOp::Pow => prec::POW,
        }
    }

    /// The operator written as `text`, if there is one.
    pub(crate) fn from_symbol(text: &str) -> Option<BinOp> {
        const ALL: [BinOp; 13] = [
            BinOp::Or,
            BinOp::And,
            BinOp::Lt,
            BinOp::Le,
            BinOp::Gt,
            BinOp::Ge,
            BinOp::Eq,
            BinOp::Ne,
            BinOp::Add,
            BinOp::Sub,
            BinOp::Mul,
            BinOp::Div,
            BinOp::Pow,
        ];
        ALL.into_iter().find(|op| op.symbol() == text)
    }
}

impl Expr {
    /// Every column or variable name the expression references, sorted and deduplicated.
    pub fn names(&self) -> BTreeSet<String> {
        let mut out = BTreeSet::new();
        self.collect_names(&mut out);
        out
    }

    fn collect_names(&self, out: &mut BTreeSet<String>) {
        if let Expr::Name(name) = self {
            out.insert(name.clone());
        }
        for child in self.children() {
            child.collect_names(out);
        }
    }

    /// True when `lag` or `diff` appears anywhere in the expression.
    pub fn uses_lag(&self) -> bool {
        matches!(
            self,
            Expr::Lag { .. }
                | Expr::Call {
                    func: Func::Diff,
                    ..
                }
        ) || self.children().into_iter().any(Expr::uses_lag)
    }

    /// The direct subexpressions, left to right.
    fn children(&self) -> Vec<&Expr> {
        match self {
            Expr::Number(_) | Expr::Name(_) => Vec::new(),
            Expr::Neg(a) | Expr::Not(a) | Expr::Call { arg: a, .. } | Expr::Lag { arg: a, .. } => {
                vec![a]
            }
            Expr::Binary { left, right, .. } => vec![left, right],
            Expr::If {
                cond,
                then,
                otherwise,
            } => vec![cond, then, otherwise],
            Expr::Draw { args, .. } => args.iter().collect(),
        }
    }

    /// True when a random draw appears anywhere in the expression.
    pub fn uses_draws(&self) -> bool {
        matches!(self, Expr::Draw { .. }) || self.children().into_iter().any(Expr::uses_draws)
    }

    /// Every draw function used, outermost first, left to right.
    pub fn draws(&self) -> Vec<Draw> {
        let mut out = Vec::new();
        if let Expr::Draw { draw, .. } = self {
            out.push(*draw);
        }
        for c in self.children() {
            out.extend(c.draws());
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names_of(src: &str) -> Vec<String> {
        parse(src).expect("valid").names().into_iter().collect()
    }

    #[test]
    fn names_are_sorted_and_deduplicated() {
        assert_eq!(
            names_of("z + a * lag(z, 2) - if(b > a, ln(c), 1)"),
            ["a", "b", "c", "z"]
        );
        assert!(names_of("1 + 2 ^ 3").is_empty());
    }

    #[test]
    fn function_names_are_not_column_names() {
        // `ln` before `(` is the function; alone it is a column.
        assert_eq!(names_of("ln(x) + ln"), ["ln", "x"]);
    }

    #[test]
    fn uses_lag_finds_lag_and_diff_at_any_depth() {
        assert!(parse("lag(x, 1)").expect("valid").uses_lag());
        assert!(parse("1 + abs(diff(x))").expect("valid").uses_lag());
        assert!(parse("if(a, b, -lag(c, 3))").expect("valid").uses_lag());
        assert!(!parse("ln(x) + lag + diff").expect("valid").uses_lag());
    }

    #[test]
    fn trees_at_max_depth_parse_print_and_evaluate_on_a_test_thread_stack() {
        let d = MAX_DEPTH - 1;
        let shapes = [
            format!("{}x{}", "ln(".repeat(d), ")".repeat(d)),
            format!("{}x{}", "(".repeat(d), ")".repeat(d)),
            format!("{}x{}", "if(x, 1, ".repeat(d), ")".repeat(d)),
            format!("{}x", "-".repeat(d)),
            format!("{}x", "not ".repeat(d)),
            vec!["x"; MAX_DEPTH].join(" ^ "),
        ];
        // 2 MiB, the default for test threads, set here so the test does not depend on it.
        let worker = std::thread::Builder::new()
            .stack_size(2 << 20)
            .spawn(move || {
                let col = [Some(1.0)];
                for src in shapes {
                    let tree = parse(&src).expect("valid at the cap");
                    assert_eq!(parse(&tree.to_string()).as_ref(), Ok(&tree));
                    let out = tree
                        .eval(1, &|_| Some(&col as &dyn Values))
                        .expect("evaluates");
                    assert_eq!(out.len(), 1);
                }
            });
        assert!(worker.expect("spawns").join().is_ok());
    }
}
