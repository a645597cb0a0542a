//! The file line of each kept row of a sweep log, stored as runs of consecutive lines.
//!
//! Rows of a plain log sit on consecutive lines, so a million-row log needs one run
//! instead of a million numbers (8 MB the reader would write and page in). Blank,
//! comment and skipped lines start a new run. A row's line is found by a binary search
//! over the runs.

/// The 1-based file line of each kept row, in row order.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct RowLines {
    /// `(first row, its line)` of each run; the rows of a run are on consecutive lines.
    runs: Vec<(usize, u64)>,
    /// Number of rows.
    len: usize,
}

impl RowLines {
    /// No rows.
    pub fn new() -> Self {
        Self::default()
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.len
    }

    /// True when there is no row.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Number of runs of consecutive lines (a plain log has one).
    pub fn runs(&self) -> usize {
        self.runs.len()
    }

    /// Add the next row, on file line `line`.
    pub fn push(&mut self, line: u64) {
        match self.runs.last() {
            Some(&(row, first)) if first.checked_add((self.len - row) as u64) == Some(line) => {}
            _ => self.runs.push((self.len, line)),
        }
        self.len += 1;
    }

    /// Line of row `row`, or `None` past the end.
    pub fn get(&self, row: usize) -> Option<u64> {
        if row >= self.len {
            return None;
        }
        let k = self.runs.partition_point(|&(first, _)| first <= row);
        let (first, line) = self.runs[k - 1];
        Some(line + (row - first) as u64)
    }

    /// Lines in row order.
    pub fn iter(&self) -> impl Iterator<Item = u64> + '_ {
        self.runs
            .iter()
            .enumerate()
            .flat_map(move |(k, &(first, line))| {
                let end = self.runs.get(k + 1).map_or(self.len, |r| r.0);
                (0..(end - first) as u64).map(move |d| line + d)
            })
    }

    /// Lines in row order, one number per row.
    pub fn to_vec(&self) -> Vec<u64> {
        self.iter().collect()
    }

    /// Append the rows of `other`, its lines moved on by `offset`.
    pub(crate) fn append_shifted(&mut self, other: &RowLines, offset: u64) {
        for (k, &(first, line)) in other.runs.iter().enumerate() {
            let end = other.runs.get(k + 1).map_or(other.len, |r| r.0);
            let line = line + offset;
            let rows = end - first;
            match self.runs.last() {
                Some(&(row, l)) if l.checked_add((self.len - row) as u64) == Some(line) => {}
                _ => self.runs.push((self.len, line)),
            }
            self.len += rows;
        }
    }

    /// Forget every row, keeping the allocation.
    pub(crate) fn clear(&mut self) {
        self.runs.clear();
        self.len = 0;
    }
}

impl FromIterator<u64> for RowLines {
    fn from_iter<I: IntoIterator<Item = u64>>(iter: I) -> Self {
        let mut out = RowLines::new();
        for line in iter {
            out.push(line);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn a_plain_log_is_one_run() {
        let lines: RowLines = (2..1_000_002).collect();
        assert_eq!(lines.len(), 1_000_000);
        assert_eq!(lines.runs(), 1);
        assert_eq!(lines.get(0), Some(2));
        assert_eq!(lines.get(999_999), Some(1_000_001));
        assert_eq!(lines.get(1_000_000), None);
    }

    proptest! {
        /// Against the plain vector of lines it replaces: any increasing lines, any
        /// split into appended parts.
        #[test]
        fn runs_answer_like_a_vector(
            gaps in prop::collection::vec(1u64..4, 0..200),
            cut in 0usize..200,
        ) {
            let mut want = Vec::new();
            let mut line = 1;
            for g in &gaps {
                line += g;
                want.push(line);
            }
            let whole: RowLines = want.iter().copied().collect();
            prop_assert_eq!(whole.len(), want.len());
            prop_assert_eq!(whole.to_vec(), want.clone());
            for (i, &l) in want.iter().enumerate() {
                prop_assert_eq!(whole.get(i), Some(l));
            }
            prop_assert_eq!(whole.get(want.len()), None);
            // Parts with lines counted from their own start, appended with an offset.
            let cut = cut.min(want.len());
            let base = if cut > 0 { want[cut - 1] } else { 0 };
            let head: RowLines = want[..cut].iter().copied().collect();
            let tail: RowLines = want[cut..].iter().map(|l| l - base).collect();
            let mut joined = RowLines::new();
            joined.append_shifted(&head, 0);
            joined.append_shifted(&tail, base);
            prop_assert_eq!(&joined, &whole);
        }
    }
}
