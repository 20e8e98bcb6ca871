//! Recursive-descent parser from tokens to an [`Expr`] tree.
//!
//! Precedence climbing over the grammar levels of the parent module's table. Invariants: the
//! parser's own recursion is bounded by counting nested parentheses, argument lists and
//! prefix operators against [`MAX_DEPTH`]; every node it builds knows its depth, and a tree
//! deeper than [`MAX_DEPTH`] is refused, so later recursive walks are bounded too.

use super::call::build_call;
use super::lexer::{tokenize, Tok, Token};
use super::node::Node;
use super::parse_error::{self, chained, is_reserved, too_deep};
use super::{prec, BinOp, Expr, ExprError, MAX_DEPTH};

/// Parses `src` into an expression tree.
///
/// # Errors
/// Empty input, an unknown character, a misplaced or missing operand, unbalanced
/// parentheses, chained comparisons, an unknown function or wrong arguments, trailing text
/// after a complete expression, or nesting deeper than [`MAX_DEPTH`]. Each error carries
/// the character offset of the problem.
pub fn parse(src: &str) -> Result<Expr, ExprError> {
    parse_with(src, false)
}

/// Parses `src` like [`parse`], also accepting the random-draw functions of a rehearsal's
/// data-generating process (`normal`, `bernoulli`, ...; see [`Draw`](super::Draw)).
///
/// # Errors
/// As [`parse`].
pub fn parse_random(src: &str) -> Result<Expr, ExprError> {
    parse_with(src, true)
}

fn parse_with(src: &str, draws: bool) -> Result<Expr, ExprError> {
    let tokens = tokenize(src)?;
    if tokens.len() == 1 {
        return Err(ExprError::at(
            0,
            "the expression is empty; write a formula such as `ln(kwh + 1)`",
        ));
    }
    let mut parser = Parser {
        tokens,
        pos: 0,
        nesting: 0,
        draws,
    };
    let node = parser.nested(0, prec::OR)?;
    parser.expect_end()?;
    Ok(node.expr)
}

struct Parser {
    tokens: Vec<Token>,
    pos: usize,
    nesting: usize,
    /// Whether random-draw functions are accepted.
    draws: bool,
}

impl Parser {
    fn peek(&self) -> &Token {
        &self.tokens[self.pos.min(self.tokens.len() - 1)]
    }

    fn peek_second(&self) -> &Tok {
        &self.tokens[(self.pos + 1).min(self.tokens.len() - 1)].tok
    }

    fn advance(&mut self) -> Token {
        let token = self.peek().clone();
        if token.tok != Tok::End {
            self.pos += 1;
        }
        token
    }

    /// The binary operator at the current token, if it is one.
    fn peek_op(&self) -> Option<BinOp> {
        match &self.peek().tok {
            Tok::Sym(s) => BinOp::from_symbol(s),
            Tok::Word(w) if w == "and" || w == "or" => BinOp::from_symbol(w),
            _ => None,
        }
    }

    /// `climb(min)` one nesting level deeper, refused at `offset` past [`MAX_DEPTH`].
    fn nested(&mut self, offset: usize, min: u8) -> Result<Node, ExprError> {
        if self.nesting >= MAX_DEPTH {
            return Err(too_deep(offset));
        }
        self.nesting += 1;
        let out = self.climb(min);
        self.nesting -= 1;
        out
    }

    /// The longest expression whose infix operators all bind at least as tightly as `min`
    /// (precedence climbing over the levels of the parent module's table).
    fn climb(&mut self, min: u8) -> Result<Node, ExprError> {
        let mut left = self.prefix(min)?;
        let mut compared: Option<BinOp> = None;
        while let Some(op) = self.peek_op().filter(|op| op.precedence() >= min) {
            let is_comparison = op.precedence() == prec::CMP;
            if let Some(first) = compared.filter(|_| is_comparison) {
                return Err(chained(self.peek().offset, first, op));
            }
            let offset = self.advance().offset;
            let right = if op == BinOp::Pow {
                self.nested(offset, prec::NEG)?
            } else {
                self.climb(op.precedence() + 1)?
            };
            left = binary(offset, op, left, right)?;
            compared = Some(op).filter(|_| is_comparison);
        }
        Ok(left)
    }

    /// A prefix `-` or `not` (the latter only where `min` allows its low level) and its
    /// operand, or else a primary.
    fn prefix(&mut self, min: u8) -> Result<Node, ExprError> {
        let offset = self.peek().offset;
        let (level, wrap): (u8, fn(Box<Expr>) -> Expr) = match &self.peek().tok {
            Tok::Sym("-") => (prec::NEG, Expr::Neg),
            Tok::Word(w) if w == "not" && min <= prec::NOT => (prec::NOT, Expr::Not),
            _ => return self.primary(),
        };
        self.advance();
        let inner = self.nested(offset, level)?;
        Node::over(offset, &[inner.depth], wrap(Box::new(inner.expr)))
    }

    fn primary(&mut self) -> Result<Node, ExprError> {
        let token = self.peek().clone();
        match &token.tok {
            Tok::Number(v) => {
                self.advance();
                Ok(Node::leaf(Expr::Number(*v)))
            }
            Tok::Word(w) if *self.peek_second() == Tok::Sym("(") && !is_operator_word(w) => {
                self.call(w, token.offset)
            }
            Tok::Word(w) if !is_reserved(w) => {
                self.advance();
                Ok(Node::leaf(Expr::Name(w.clone())))
            }
            Tok::Quoted(name) => {
                self.advance();
                Ok(Node::leaf(Expr::Name(name.clone())))
            }
            Tok::Sym("(") => self.parenthesised(token.offset),
            _ => Err(self.missing_operand(&token)),
        }
    }

    fn parenthesised(&mut self, open: usize) -> Result<Node, ExprError> {
        self.advance();
        let inner = self.nested(open, prec::OR)?;
        if self.peek().tok != Tok::Sym(")") {
            return Err(self.unclosed(open, "this `(`"));
        }
        self.advance();
        Ok(inner)
    }

    /// A call `name(arg, ...)`; the current token is `name`, the next one `(`.
    fn call(&mut self, name: &str, offset: usize) -> Result<Node, ExprError> {
        let draw = super::Draw::named(name);
        if draw.is_none() {
            super::call::check_known(name, offset)?;
        }
        self.advance();
        let open = self.advance().offset;
        let mut args = Vec::new();
        if self.peek().tok != Tok::Sym(")") {
            loop {
                let at = self.peek().offset;
                args.push((self.nested(at, prec::OR)?, at));
                if self.peek().tok != Tok::Sym(",") {
                    break;
                }
                self.advance();
            }
        }
        if self.peek().tok != Tok::Sym(")") {
            return Err(self.unclosed(open, &format!("the `(` of `{name}(`")));
        }
        self.advance();
        match draw {
            Some(d) => super::draw::build_draw(d, self.draws, offset, args),
            None => build_call(name, offset, args),
        }
    }

    /// The error for a `(` at `open` that is not closed where the parser stands now.
    fn unclosed(&self, open: usize, what: &str) -> ExprError {
        parse_error::unclosed(open, what, self.peek())
    }

    /// The error for `token` standing where a value must be.
    fn missing_operand(&self, token: &Token) -> ExprError {
        let previous = self.pos.checked_sub(1).map(|i| &self.tokens[i].tok);
        parse_error::missing_operand(token, previous)
    }

    fn expect_end(&self) -> Result<(), ExprError> {
        match self.peek() {
            Token { tok: Tok::End, .. } => Ok(()),
            token => Err(parse_error::trailing(token)),
        }
    }
}

/// `left op right`, refused at `offset` when too deep.
fn binary(offset: usize, op: BinOp, left: Node, right: Node) -> Result<Node, ExprError> {
    let depths = [left.depth, right.depth];
    let expr = Expr::Binary {
        op,
        left: Box::new(left.expr),
        right: Box::new(right.expr),
    };
    Node::over(offset, &depths, expr)
}

/// Reserved words that are operators, never functions, even before `(`.
fn is_operator_word(word: &str) -> bool {
    matches!(word, "and" | "or" | "not")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tree(src: &str) -> Expr {
        parse(src).unwrap_or_else(|e| panic!("`{src}` should parse: {e}"))
    }

    fn error(src: &str) -> ExprError {
        parse(src).expect_err("should be refused")
    }

    fn assert_error(src: &str, offset: usize, part: &str) {
        let e = error(src);
        assert_eq!(e.offset, Some(offset), "source `{src}`: {e}");
        assert!(e.message.contains(part), "source `{src}`: {e}");
    }

    #[test]
    fn precedence_follows_the_table_lowest_to_highest() {
        let same = [
            ("a or b and c", "a or (b and c)"),
            ("a and b or c", "(a and b) or c"),
            ("not a and b", "(not a) and b"),
            ("not a < b", "not (a < b)"),
            ("a < b + c", "a < (b + c)"),
            ("a + b < c", "(a + b) < c"),
            ("a + b * c", "a + (b * c)"),
            ("a * b + c", "(a * b) + c"),
            ("-a * b", "(-a) * b"),
            ("-a ^ b", "-(a ^ b)"),
            ("a ^ b ^ c", "a ^ (b ^ c)"),
            ("a - b - c", "(a - b) - c"),
            ("a / b / c", "(a / b) / c"),
            ("a or b or c", "(a or b) or c"),
            ("a ^ -b ^ c", "a ^ (-(b ^ c))"),
            ("not not a", "not (not a)"),
        ];
        for (src, explicit) in same {
            assert_eq!(tree(src), tree(explicit), "`{src}` vs `{explicit}`");
        }
    }

    #[test]
    fn leaves_and_shapes() {
        assert_eq!(tree(" x_1 "), Expr::Name("x_1".into()));
        assert_eq!(tree("2.5"), Expr::Number(2.5));
        assert_eq!(
            tree("-x ^ 2"),
            Expr::Neg(Box::new(Expr::Binary {
                op: BinOp::Pow,
                left: Box::new(Expr::Name("x".into())),
                right: Box::new(Expr::Number(2.0)),
            }))
        );
        // `ln` is a column unless `(` follows; `not (` is the operator.
        assert_eq!(tree("ln"), Expr::Name("ln".into()));
        assert_eq!(tree("not(x)"), Expr::Not(Box::new(Expr::Name("x".into()))));
    }

    #[test]
    fn nesting_is_capped_at_max_depth() {
        // The whole expression is one level; each `(` adds one.
        let ok = format!(
            "{}x{}",
            "(".repeat(MAX_DEPTH - 1),
            ")".repeat(MAX_DEPTH - 1)
        );
        assert_eq!(tree(&ok), Expr::Name("x".into()));
        let deep = format!("{}x{}", "(".repeat(MAX_DEPTH), ")".repeat(MAX_DEPTH));
        assert_error(&deep, MAX_DEPTH - 1, "more than 200 levels deep");
        for src in [
            "-".repeat(100_000) + "x",
            "not ".repeat(100_000) + "x",
            "2 ^ ".repeat(100_000) + "2",
            "ln(".repeat(100_000) + "x",
        ] {
            assert!(error(&src).message.contains("more than 200 levels deep"));
        }
    }

    #[test]
    fn tree_depth_is_capped_even_without_recursion() {
        // `1 + 1 + ...` parses in a loop but builds a left-leaning tree; a leaf has depth 1.
        let ok = vec!["1"; MAX_DEPTH].join(" + ");
        assert!(parse(&ok).is_ok());
        let deep = vec!["1"; MAX_DEPTH + 1].join(" + ");
        assert_error(&deep, 4 * MAX_DEPTH - 2, "more than 200 levels deep");
        let long = vec!["x"; 100_000].join(" * ");
        assert!(error(&long)
            .message
            .contains("split it into several [derive]"));
    }
}
