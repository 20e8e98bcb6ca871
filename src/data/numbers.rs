//! A numeric column of a loaded table: the values as contiguous f64 (8 bytes a value), with
//! a missing cell stored as NaN. Every value a table holds is finite (the loader refuses
//! other numbers and the expression evaluator reads non-finite results as missing), so NaN
//! marks nothing else; readers go through [`Numbers::get`] and [`Numbers::iter`], which give
//! `None` for it.

/// A numeric column: finite values, NaN where the cell is missing.
#[derive(Debug, Clone, Default)]
pub struct Numbers(Vec<f64>);

impl Numbers {
    /// The number of cells.
    pub fn len(&self) -> usize {
        self.0.len()
    }

    /// Whether the column has no cells.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    /// The value in row `i`, `None` when missing.
    ///
    /// # Panics
    /// When `i` is not a row of the column (as indexing a slice).
    pub fn get(&self, i: usize) -> Option<f64> {
        let v = self.0[i];
        (!v.is_nan()).then_some(v)
    }

    /// The cells in row order, `None` for a missing one.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = Option<f64>> + '_ {
        self.0.iter().map(|&v| (!v.is_nan()).then_some(v))
    }

    /// A column from values stored as a table keeps them: each finite, or NaN for a
    /// missing cell (what the plain CSV parser writes).
    pub(crate) fn stored(values: Vec<f64>) -> Self {
        debug_assert!(values.iter().all(|v| v.is_finite() || v.is_nan()));
        Numbers(values)
    }

    /// The stored values, NaN where a cell is missing: for readers that have already
    /// excluded the missing rows.
    pub fn raw(&self) -> &[f64] {
        &self.0
    }
}

/// The store of a cell: the value, or NaN when missing (or not finite, which a table reads
/// as missing).
fn stored(v: Option<f64>) -> f64 {
    v.filter(|x| x.is_finite()).unwrap_or(f64::NAN)
}

impl FromIterator<Option<f64>> for Numbers {
    fn from_iter<I: IntoIterator<Item = Option<f64>>>(cells: I) -> Self {
        let mut values: Vec<f64> = cells.into_iter().map(stored).collect();
        // Collecting from a vector's own iterator may reuse its allocation, twice the size
        // of the values: give the excess back.
        values.shrink_to_fit();
        Numbers(values)
    }
}

impl From<Vec<Option<f64>>> for Numbers {
    /// A fresh allocation of 8 bytes a cell; the cells' 16 bytes a cell are freed.
    fn from(cells: Vec<Option<f64>>) -> Self {
        Numbers::from(cells.as_slice())
    }
}

impl From<&[Option<f64>]> for Numbers {
    fn from(cells: &[Option<f64>]) -> Self {
        let mut values = Vec::with_capacity(cells.len());
        values.extend(cells.iter().map(|&v| stored(v)));
        Numbers(values)
    }
}

/// Two columns are equal when every cell is: the same value, or missing in both.
impl PartialEq for Numbers {
    fn eq(&self, other: &Self) -> bool {
        self.len() == other.len() && self.iter().eq(other.iter())
    }
}

impl crate::expr::Values for Numbers {
    fn count(&self) -> usize {
        self.len()
    }

    fn value(&self, i: usize) -> Option<f64> {
        self.get(i)
    }
}

#[cfg(test)]
mod tests {
    use super::Numbers;

    #[test]
    fn missing_and_non_finite_cells_read_as_none() {
        let n: Numbers = vec![Some(1.5), None, Some(f64::INFINITY), Some(-0.0)].into();
        assert_eq!(n.len(), 4);
        assert_eq!(n.get(0), Some(1.5));
        assert_eq!(n.get(1), None);
        assert_eq!(n.get(2), None);
        assert_eq!(n.get(3).map(f64::to_bits), Some((-0.0f64).to_bits()));
        let cells: Vec<Option<f64>> = n.iter().collect();
        assert_eq!(cells, vec![Some(1.5), None, None, Some(-0.0)]);
        assert_eq!(n, Numbers::from(cells));
        assert_ne!(
            n,
            Numbers::from(vec![Some(1.5), Some(0.0), None, Some(0.0)])
        );
    }

    /// A column holds 8 bytes a cell however it was built: collecting from a vector of
    /// cells in place would keep that vector's 16 bytes a cell.
    #[test]
    fn a_column_keeps_no_excess_capacity() {
        let cells: Vec<Option<f64>> = (0..1000)
            .map(|i| (i % 7 != 0).then_some(i as f64))
            .collect();
        let from_vec = Numbers::from(cells.clone());
        let collected: Numbers = cells.clone().into_iter().collect();
        for n in [&from_vec, &collected] {
            assert_eq!(n.0.capacity(), 1000);
            assert_eq!(n.iter().collect::<Vec<_>>(), cells);
        }
    }
}
