//! Random draws: the functions a `[rehearsal]` data-generating process may call on top of
//! the ordinary expression language. They parse only through [`parse_random`](super::parse_random);
//! `[derive]`, `sample` and every other expression refuse them, so no registered variable can
//! depend on chance.
//!
//! Evaluation needs a [`DrawSource`] (the rehearsal's random stream); [`Expr::eval`](super::Expr::eval)
//! has none and reports a draw as an error. Arguments are evaluated column-wise like any
//! other operand and handed to the source with the function.

use super::node::Node;
use super::{Expr, ExprError};

/// A random-draw (or row-structure) function of a rehearsal.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Draw {
    /// `normal(mean, sd)`: one normal draw per row.
    Normal,
    /// `uniform(low, high)`: one uniform draw per row on [low, high).
    Uniform,
    /// `bernoulli(p)`: 1 with probability p, else 0, per row.
    Bernoulli,
    /// `level(k)`: a whole number 1..=k, each equally likely, per row.
    Level,
    /// `group(k)`: rows split in table order into k consecutive groups of (nearly) equal
    /// size, numbered 1..=k; not random.
    Group,
    /// `group_normal(g, sd)`: one normal(0, sd) draw per distinct value of `g`, shared by
    /// its rows (a cluster-level shock).
    GroupNormal,
    /// `assigned(share)`: the treatment drawn as `[assignment]` declares (blocks, clusters),
    /// with `share` of the units (or clusters) of each block assigned 1.
    Assigned,
}

/// Every draw function with how it is called (for messages).
pub(crate) const DRAWS: [(Draw, &str, &str); 7] = [
    (Draw::Normal, "normal", "normal(mean, sd)"),
    (Draw::Uniform, "uniform", "uniform(low, high)"),
    (Draw::Bernoulli, "bernoulli", "bernoulli(p)"),
    (Draw::Level, "level", "level(k)"),
    (Draw::Group, "group", "group(k)"),
    (Draw::GroupNormal, "group_normal", "group_normal(g, sd)"),
    (Draw::Assigned, "assigned", "assigned(share)"),
];

impl Draw {
    /// The function's name as written.
    pub fn name(self) -> &'static str {
        DRAWS
            .iter()
            .find(|(d, _, _)| *d == self)
            .map_or("", |(_, n, _)| n)
    }

    /// How the function is called.
    pub fn usage(self) -> &'static str {
        DRAWS
            .iter()
            .find(|(d, _, _)| *d == self)
            .map_or("", |(_, _, u)| u)
    }

    /// The draw function called `name`, if any.
    pub fn named(name: &str) -> Option<Draw> {
        DRAWS
            .iter()
            .find(|(_, n, _)| *n == name)
            .map(|(d, _, _)| *d)
    }

    /// Number of arguments.
    pub fn arity(self) -> usize {
        self.usage().matches(',').count() + 1
    }
}

/// Where the random numbers of a draw come from.
pub trait DrawSource {
    /// The values of `draw` over `n` rows, given its evaluated arguments (one column each).
    ///
    /// # Errors
    /// An argument outside the function's domain (the message names the row and value).
    fn draw(
        &self,
        draw: Draw,
        args: &[Vec<Option<f64>>],
        n: usize,
    ) -> Result<Vec<Option<f64>>, ExprError>;
}

/// Builds the draw node `name(args)` at `offset`, or refuses it when draws are not allowed.
///
/// # Errors
/// Draws are not allowed here, or the number of arguments is wrong.
pub(crate) fn build_draw(
    draw: Draw,
    allowed: bool,
    offset: usize,
    args: Vec<(Node, usize)>,
) -> Result<Node, ExprError> {
    let name = draw.name();
    if !allowed {
        return Err(ExprError::at(
            offset,
            format!(
                "`{name}` draws random numbers, which only a [rehearsal] data-generating process \
                 may do; a registered variable or sample must not depend on chance"
            ),
        ));
    }
    if args.len() != draw.arity() {
        return Err(ExprError::at(
            offset,
            format!(
                "`{name}` takes {} argument(s) ({}) but was given {}",
                draw.arity(),
                draw.usage(),
                args.len()
            ),
        ));
    }
    let depths: Vec<usize> = args.iter().map(|(n, _)| n.depth).collect();
    let args = args.into_iter().map(|(n, _)| n.expr).collect();
    Node::over(offset, &depths, Expr::Draw { draw, args })
}
