//! The labels of a grouping column, stored once per distinct label: a dictionary of the
//! distinct values and a 4-byte code per row, so a column of n rows with few distinct
//! labels (clusters, blocks, binary indicators) costs about 4·n bytes rather than a heap
//! string per row. Reads give the same `&Option<String>` a plain vector would.

use std::collections::{BTreeMap, HashMap};
use std::ops::Index;

/// Labels of one column, row by row (`None`: missing).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Labels {
    /// The distinct values, `None` (missing) included when it occurs.
    dict: Vec<Option<String>>,
    /// The dictionary entry of each row.
    codes: Vec<u32>,
}

/// In which order [`Labels::dense_ids`] numbers the distinct labels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IdOrder {
    /// Sorted label order (a design's fixed effects and clusters).
    Sorted,
    /// Order of first appearance among the rows (resampling units).
    FirstSeen,
}

/// More distinct labels than a 4-byte code can number.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TooManyLabels;

impl Labels {
    /// Dense 0-based ids of the labels at `rows`, numbered in `order`, and how many distinct
    /// labels there are; `None` when one of the rows has no label. Labels are compared as
    /// text, so identifier columns stored one entry per row number equal labels alike.
    pub fn dense_ids(&self, rows: &[usize], order: IdOrder) -> Option<(Vec<usize>, usize)> {
        let mut first: BTreeMap<&str, usize> = BTreeMap::new();
        // The id of each dictionary entry once seen: the text is looked up once per entry,
        // not once per row (entries with equal text still share an id).
        let mut by_code: Vec<Option<usize>> = vec![None; self.dict.len()];
        let mut ids = Vec::with_capacity(rows.len());
        for &r in rows {
            let code = self.codes[r] as usize;
            let id = match by_code[code] {
                Some(id) => id,
                None => {
                    let label = self.dict[code].as_deref()?;
                    let next = first.len();
                    let id = *first.entry(label).or_insert(next);
                    by_code[code] = Some(id);
                    id
                }
            };
            ids.push(id);
        }
        if order == IdOrder::Sorted {
            // `first` iterates in sorted label order: its k-th entry gets id k.
            let mut rank = vec![0; first.len()];
            for (k, &seen) in first.values().enumerate() {
                rank[seen] = k;
            }
            for id in &mut ids {
                *id = rank[*id];
            }
        }
        Some((ids, first.len()))
    }

    /// Labels from text values, in row order.
    pub(crate) fn from_text(values: Vec<Option<String>>) -> Result<Self, TooManyLabels> {
        let mut index: HashMap<String, u32> = HashMap::new();
        let mut missing: Option<u32> = None;
        let mut labels = Labels {
            dict: Vec::new(),
            codes: Vec::with_capacity(values.len()),
        };
        for v in values {
            let code = match v {
                None => match missing {
                    Some(c) => c,
                    None => *missing.insert(labels.push(None)?),
                },
                Some(v) => match index.get(&v) {
                    Some(&c) => c,
                    None => {
                        let c = labels.push(Some(v.clone()))?;
                        index.insert(v, c);
                        c
                    }
                },
            };
            labels.codes.push(code);
        }
        Ok(labels)
    }

    /// Labels expected to be distinct row by row (identifiers): kept as they are, one entry
    /// per row, with no hashing (duplicates are found by the key check, not here).
    pub(crate) fn by_row(values: Vec<Option<String>>) -> Result<Self, TooManyLabels> {
        let n = u32::try_from(values.len()).map_err(|_| TooManyLabels)?;
        Ok(Labels {
            dict: values,
            codes: (0..n).collect(),
        })
    }

    /// Labels of a numeric column: each distinct number written once, as `{}` writes it.
    pub(crate) fn from_numbers(
        values: impl ExactSizeIterator<Item = Option<f64>>,
    ) -> Result<Self, TooManyLabels> {
        let mut index: HashMap<Option<u64>, u32> = HashMap::new();
        let mut labels = Labels {
            dict: Vec::new(),
            codes: Vec::with_capacity(values.len()),
        };
        for v in values {
            let code = match index.get(&v.map(f64::to_bits)) {
                Some(&c) => c,
                None => {
                    let c = labels.push(v.map(|x| format!("{x}")))?;
                    index.insert(v.map(f64::to_bits), c);
                    c
                }
            };
            labels.codes.push(code);
        }
        Ok(labels)
    }

    fn push(&mut self, value: Option<String>) -> Result<u32, TooManyLabels> {
        let code = u32::try_from(self.dict.len()).map_err(|_| TooManyLabels)?;
        self.dict.push(value);
        Ok(code)
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.codes.len()
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.codes.is_empty()
    }

    /// The label of row `r`, `None` past the end.
    pub fn get(&self, r: usize) -> Option<&Option<String>> {
        self.codes.get(r).map(|&c| &self.dict[c as usize])
    }

    /// The labels row by row.
    pub fn iter(&self) -> impl Iterator<Item = &Option<String>> + '_ {
        self.codes.iter().map(|&c| &self.dict[c as usize])
    }

    /// The rows in the order `rows` gives.
    pub(crate) fn reorder(&self, rows: &[usize]) -> Labels {
        Labels {
            dict: self.dict.clone(),
            codes: rows.iter().map(|&r| self.codes[r]).collect(),
        }
    }
}

impl Index<usize> for Labels {
    type Output = Option<String>;

    fn index(&self, r: usize) -> &Option<String> {
        &self.dict[self.codes[r] as usize]
    }
}

impl<'a> IntoIterator for &'a Labels {
    type Item = &'a Option<String>;
    type IntoIter = Box<dyn Iterator<Item = &'a Option<String>> + 'a>;

    fn into_iter(self) -> Self::IntoIter {
        Box::new(self.iter())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Ids by first appearance and by sorted label, worked by hand: rows 3, 0, 1, 2 of
    /// ["b", "a", "b", "c"] read "c", "b", "a", "b".
    #[test]
    fn dense_ids_number_in_either_order() {
        let text = ["b", "a", "b", "c"].map(|s| Some(s.to_string())).to_vec();
        for labels in [
            Labels::from_text(text.clone()).expect("labels"),
            Labels::by_row(text).expect("labels"),
        ] {
            let rows = [3, 0, 1, 2];
            assert_eq!(
                labels.dense_ids(&rows, IdOrder::FirstSeen),
                Some((vec![0, 1, 2, 1], 3))
            );
            assert_eq!(
                labels.dense_ids(&rows, IdOrder::Sorted),
                Some((vec![2, 1, 0, 1], 3))
            );
        }
        let gap = Labels::from_text(vec![Some("a".into()), None]).expect("labels");
        assert_eq!(gap.dense_ids(&[0, 1], IdOrder::Sorted), None);
        assert_eq!(gap.dense_ids(&[0], IdOrder::Sorted), Some((vec![0], 1)));
    }

    #[test]
    fn labels_read_back_row_by_row() {
        let text = vec![
            Some("b".to_string()),
            None,
            Some("a".into()),
            Some("b".into()),
            None,
        ];
        let l = Labels::from_text(text.clone()).unwrap();
        assert_eq!(l.iter().cloned().collect::<Vec<_>>(), text);
        assert_eq!(l.dict.len(), 3);
        assert_eq!(l[3], Some("b".to_string()));
        assert_eq!(l.get(5), None);
        let r = l.reorder(&[2, 0, 4]);
        assert_eq!(
            r.iter().cloned().collect::<Vec<_>>(),
            vec![Some("a".into()), Some("b".into()), None]
        );
    }

    #[test]
    fn identifiers_are_kept_row_by_row() {
        let text = vec![Some("x".to_string()), None, Some("x".into())];
        let l = Labels::by_row(text.clone()).unwrap();
        assert_eq!(l.iter().cloned().collect::<Vec<_>>(), text);
        assert_eq!(l.reorder(&[1, 0])[1], Some("x".to_string()));
    }

    #[test]
    fn numbers_are_written_once_as_display_writes_them() {
        let l =
            Labels::from_numbers([Some(1.0), Some(0.5), None, Some(1.0), Some(-0.0)].into_iter())
                .unwrap();
        let shown: Vec<Option<&str>> = l.iter().map(Option::as_deref).collect();
        assert_eq!(
            shown,
            vec![Some("1"), Some("0.5"), None, Some("1"), Some("-0")]
        );
        assert_eq!(l.dict.len(), 4);
    }
}
