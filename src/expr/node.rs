//! The parser's subtree: an [`Expr`] with its depth. The parser builds nodes and so do the
//! builders of calls and random draws it hands arguments to; keeping the type here lets
//! those builders depend on it without depending on the parser.

use super::parse_error::too_deep;
use super::{Expr, ExprError, MAX_DEPTH};

/// A parsed subtree with its depth (a leaf has depth 1).
pub(crate) struct Node {
    /// The subtree.
    pub(crate) expr: Expr,
    /// Its depth: 1 for a leaf, one more than its deepest child otherwise.
    pub(crate) depth: usize,
}

impl Node {
    /// A leaf: a number or a name.
    pub(crate) fn leaf(expr: Expr) -> Node {
        Node { expr, depth: 1 }
    }

    /// `expr` over children of the given depths, refused (at `offset`) when too deep.
    pub(crate) fn over(offset: usize, depths: &[usize], expr: Expr) -> Result<Node, ExprError> {
        let depth = 1 + depths.iter().copied().max().unwrap_or(0);
        if depth > MAX_DEPTH {
            return Err(too_deep(offset));
        }
        Ok(Node { expr, depth })
    }
}
