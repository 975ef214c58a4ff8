//! Ranking metrics as trec_eval defines them (recip_rank, ndcg_cut, recall), plus Kendall's tau.
//!
//! Rankings are lists of document ids best first. [`rank_by_score`] orders scored documents the
//! way trec_eval does (score descending, ties by document id descending), so figures computed
//! here equal trec_eval's on the same run.
use std::collections::HashMap;

/// Graded judgments of one query: document id -> relevance (0 = not relevant).
pub type Judgments = HashMap<String, u32>;

/// Order (id, score) pairs best first, ties broken by id descending (as trec_eval does).
pub fn rank_by_score(mut scored: Vec<(String, f64)>) -> Vec<String> {
    scored.sort_by(|a, b| b.1.total_cmp(&a.1).then_with(|| b.0.cmp(&a.0)));
    scored.into_iter().map(|(id, _)| id).collect()
}

/// Reciprocal rank of the first relevant document within the first `cutoff` (None: all).
pub fn reciprocal_rank(ranking: &[String], judged: &Judgments, cutoff: Option<usize>) -> f64 {
    let n = cutoff.unwrap_or(ranking.len()).min(ranking.len());
    ranking[..n]
        .iter()
        .position(|d| judged.get(d).is_some_and(|&r| r > 0))
        .map_or(0.0, |i| 1.0 / (i as f64 + 1.0))
}

/// Share of relevant documents found in the first `k`.
pub fn recall_at(ranking: &[String], judged: &Judgments, k: usize) -> f64 {
    let relevant = judged.values().filter(|&&r| r > 0).count();
    if relevant == 0 {
        return 0.0;
    }
    let found = ranking
        .iter()
        .take(k)
        .filter(|d| judged.get(*d).is_some_and(|&r| r > 0))
        .count();
    found as f64 / relevant as f64
}

/// nDCG at `k` with linear gains (the relevance grade) and log2(rank + 1) discounts, the ideal
/// ordering taken over all judged documents (trec_eval's ndcg_cut).
pub fn ndcg_at(ranking: &[String], judged: &Judgments, k: usize) -> f64 {
    let dcg: f64 = ranking
        .iter()
        .take(k)
        .enumerate()
        .map(|(i, d)| *judged.get(d).unwrap_or(&0) as f64 / (i as f64 + 2.0).log2())
        .sum();
    let mut ideal: Vec<u32> = judged.values().copied().filter(|&r| r > 0).collect();
    ideal.sort_unstable_by(|a, b| b.cmp(a));
    let idcg: f64 = ideal
        .iter()
        .take(k)
        .enumerate()
        .map(|(i, &r)| r as f64 / (i as f64 + 2.0).log2())
        .sum();
    if idcg == 0.0 {
        0.0
    } else {
        dcg / idcg
    }
}

/// Kendall's tau-b between two score lists over the same items (1: same order, -1: reversed).
pub fn kendall_tau_b(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len(), "tau compares scores of the same items");
    let (mut concordant, mut discordant, mut ties_a, mut ties_b) = (0i64, 0i64, 0i64, 0i64);
    for i in 0..a.len() {
        for j in i + 1..a.len() {
            let da = a[i] - a[j];
            let db = b[i] - b[j];
            if da == 0.0 && db == 0.0 {
                continue;
            } else if da == 0.0 {
                ties_a += 1;
            } else if db == 0.0 {
                ties_b += 1;
            } else if (da > 0.0) == (db > 0.0) {
                concordant += 1;
            } else {
                discordant += 1;
            }
        }
    }
    let n1 = (concordant + discordant + ties_a) as f64;
    let n2 = (concordant + discordant + ties_b) as f64;
    if n1 == 0.0 || n2 == 0.0 {
        return 0.0;
    }
    (concordant - discordant) as f64 / (n1 * n2).sqrt()
}

/// The summary figures of one plan over a set of queries.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct Summary {
    /// Queries with at least one relevant document.
    pub queries: usize,
    /// Mean reciprocal rank within the top 10.
    pub mrr_at_10: f64,
    /// Mean reciprocal rank over the full ranking (trec_eval recip_rank).
    pub mrr: f64,
    /// Mean nDCG@10.
    pub ndcg_at_10: f64,
    /// Mean Recall@1.
    pub recall_at_1: f64,
    /// Mean Recall@5.
    pub recall_at_5: f64,
    /// Mean Recall@10.
    pub recall_at_10: f64,
}

/// Average the metrics over queries that have judgments.
pub fn summarize<'a>(runs: impl IntoIterator<Item = (&'a [String], &'a Judgments)>) -> Summary {
    let mut s = Summary::default();
    for (ranking, judged) in runs {
        if !judged.values().any(|&r| r > 0) {
            continue;
        }
        s.queries += 1;
        s.mrr_at_10 += reciprocal_rank(ranking, judged, Some(10));
        s.mrr += reciprocal_rank(ranking, judged, None);
        s.ndcg_at_10 += ndcg_at(ranking, judged, 10);
        s.recall_at_1 += recall_at(ranking, judged, 1);
        s.recall_at_5 += recall_at(ranking, judged, 5);
        s.recall_at_10 += recall_at(ranking, judged, 10);
    }
    if s.queries > 0 {
        let n = s.queries as f64;
        for v in [
            &mut s.mrr_at_10,
            &mut s.mrr,
            &mut s.ndcg_at_10,
            &mut s.recall_at_1,
            &mut s.recall_at_5,
            &mut s.recall_at_10,
        ] {
            *v /= n;
        }
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ids(v: &[&str]) -> Vec<String> {
        v.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn hand_computed_case() {
        // Ranking d3 d1 d2 d4; d1 has grade 2, d4 grade 1.
        let r = ids(&["d3", "d1", "d2", "d4"]);
        let j: Judgments = [("d1".to_string(), 2), ("d4".to_string(), 1)].into();
        assert_eq!(reciprocal_rank(&r, &j, None), 0.5);
        assert_eq!(reciprocal_rank(&r, &j, Some(1)), 0.0);
        assert_eq!(recall_at(&r, &j, 1), 0.0);
        assert_eq!(recall_at(&r, &j, 2), 0.5);
        assert_eq!(recall_at(&r, &j, 10), 1.0);
        // DCG = 2/log2(3) + 1/log2(5); IDCG = 2/log2(2) + 1/log2(3)
        let want = (2.0 / 3f64.log2() + 1.0 / 5f64.log2()) / (2.0 + 1.0 / 3f64.log2());
        assert!((ndcg_at(&r, &j, 10) - want).abs() < 1e-12);
    }

    #[test]
    fn ties_break_by_id_descending() {
        let r = rank_by_score(vec![
            ("a".into(), 1.0),
            ("b".into(), 1.0),
            ("c".into(), 2.0),
        ]);
        assert_eq!(r, ids(&["c", "b", "a"]));
    }

    #[test]
    fn kendall_tau_known_values() {
        assert_eq!(kendall_tau_b(&[1.0, 2.0, 3.0], &[10.0, 20.0, 30.0]), 1.0);
        assert_eq!(kendall_tau_b(&[1.0, 2.0, 3.0], &[3.0, 2.0, 1.0]), -1.0);
        // One discordant pair of three: (2 - 1) / 3.
        assert!((kendall_tau_b(&[1.0, 2.0, 3.0], &[1.0, 3.0, 2.0]) - 1.0 / 3.0).abs() < 1e-12);
    }
}
