//! The Stock pane's state: the document list, its order and the selection.
use kerf::compare::engine::DocScore;

/// Order of the Stock list.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SortOrder {
    /// As read.
    Input,
    /// Longest first.
    Length,
    /// Most tokens past the first window first.
    Overflow,
    /// Closest to the selected reference first (current plan).
    Similarity,
}

impl SortOrder {
    /// Label in the list title.
    pub fn label(self) -> &'static str {
        match self {
            SortOrder::Input => "input order",
            SortOrder::Length => "length",
            SortOrder::Overflow => "overflow",
            SortOrder::Similarity => "similarity",
        }
    }
    /// The order after this one (the sort key cycles).
    pub fn next(self) -> Self {
        match self {
            SortOrder::Input => SortOrder::Length,
            SortOrder::Length => SortOrder::Overflow,
            SortOrder::Overflow => SortOrder::Similarity,
            SortOrder::Similarity => SortOrder::Input,
        }
    }
}

/// What the Stock pane shows: the order of the documents and where the selection is.
#[derive(Debug, Clone)]
pub struct StockView {
    /// Stock order.
    pub sort: SortOrder,
    /// Document indices in Stock order.
    pub order: Vec<usize>,
    /// Selected row of the Stock list.
    pub row: usize,
    /// First visible row of the Stock list.
    pub top: usize,
}

impl StockView {
    /// Move the selection by `n` rows, within the list; true when it moved.
    pub fn step(&mut self, n: isize) -> bool {
        let len = self.order.len();
        if len == 0 {
            return false;
        }
        let row = (self.row as isize)
            .saturating_add(n)
            .clamp(0, len as isize - 1) as usize;
        let moved = row != self.row;
        self.row = row;
        moved
    }

    /// Scroll so the selected row is among the `rows` visible ones.
    pub fn keep_in_view(&mut self, rows: usize) {
        let rows = rows.max(1);
        if self.row < self.top {
            self.top = self.row;
        } else if self.row >= self.top + rows {
            self.top = self.row + 1 - rows;
        }
    }
}

/// Document indices in the order `sort` asks for: as read, longest first, most tokens past the
/// budget first, or closest to the selected reference first (`ranking`, when scored; ties and
/// unscored documents keep input order).
pub fn order(
    sort: SortOrder,
    doc_tokens: &[usize],
    budget: usize,
    ranking: Option<&[DocScore]>,
) -> Vec<usize> {
    let n = doc_tokens.len();
    let mut order: Vec<usize> = (0..n).collect();
    match sort {
        SortOrder::Input => {}
        SortOrder::Length => order.sort_by_key(|&d| std::cmp::Reverse(doc_tokens[d])),
        SortOrder::Overflow => {
            order.sort_by_key(|&d| std::cmp::Reverse(doc_tokens[d].saturating_sub(budget)))
        }
        SortOrder::Similarity => {
            if let Some(ranking) = ranking {
                let mut score = vec![f32::NEG_INFINITY; n];
                for ds in ranking {
                    score[ds.doc] = ds.score;
                }
                order.sort_by(|&a, &b| score[b].total_cmp(&score[a]));
            }
        }
    }
    order
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn orders_and_selection() {
        let tokens = [300, 100, 900, 260];
        assert_eq!(order(SortOrder::Input, &tokens, 256, None), [0, 1, 2, 3]);
        assert_eq!(order(SortOrder::Length, &tokens, 256, None), [2, 0, 3, 1]);
        // Past a 256-token budget: 44, 0, 644, 4.
        assert_eq!(order(SortOrder::Overflow, &tokens, 256, None), [2, 0, 3, 1]);
        let ranking = [
            DocScore {
                doc: 3,
                score: 0.9,
                best_chunk: 0,
            },
            DocScore {
                doc: 1,
                score: 0.5,
                best_chunk: 0,
            },
        ];
        assert_eq!(
            order(SortOrder::Similarity, &tokens, 256, Some(&ranking)),
            [3, 1, 0, 2]
        );
        let mut v = StockView {
            sort: SortOrder::Input,
            order: vec![0, 1, 2, 3],
            row: 0,
            top: 0,
        };
        assert!(!v.step(-5));
        assert!(v.step(10));
        assert_eq!(v.row, 3);
        v.keep_in_view(2);
        assert_eq!(v.top, 2);
        v.row = 0;
        v.keep_in_view(2);
        assert_eq!(v.top, 0);
    }
}
