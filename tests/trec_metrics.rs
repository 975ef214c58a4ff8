//! kerf's ranking metrics equal trec_eval's (through pytrec-eval-terrier, PyPI) on a fixture run
//! and qrels made by tests/reference/trec_metrics.py: recip_rank, ndcg_cut_10, recall_1/5/10 and
//! MRR@10, per query and mean, to 1e-6.
use std::collections::HashMap;

use kerf::compare::metrics::{self, Judgments};

#[test]
fn metrics_match_trec_eval() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/trec");
    let mut qrels: HashMap<String, Judgments> = HashMap::new();
    for l in std::fs::read_to_string(dir.join("qrels.txt"))
        .unwrap()
        .lines()
    {
        let f: Vec<&str> = l.split_whitespace().collect();
        qrels
            .entry(f[0].into())
            .or_default()
            .insert(f[2].into(), f[3].parse().unwrap());
    }
    let mut run: HashMap<String, Vec<(String, f64)>> = HashMap::new();
    for l in std::fs::read_to_string(dir.join("run.txt"))
        .unwrap()
        .lines()
    {
        let f: Vec<&str> = l.split_whitespace().collect();
        run.entry(f[0].into())
            .or_default()
            .push((f[2].into(), f[4].parse().unwrap()));
    }
    let expected: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("expected.json")).unwrap()).unwrap();
    let mut n = 0;
    for (q, want) in expected["per_query"].as_object().unwrap() {
        let ranking = metrics::rank_by_score(run[q].clone());
        let j = &qrels[q];
        let got = [
            ("recip_rank", metrics::reciprocal_rank(&ranking, j, None)),
            (
                "recip_rank_at_10",
                metrics::reciprocal_rank(&ranking, j, Some(10)),
            ),
            ("ndcg_cut_10", metrics::ndcg_at(&ranking, j, 10)),
            ("recall_1", metrics::recall_at(&ranking, j, 1)),
            ("recall_5", metrics::recall_at(&ranking, j, 5)),
            ("recall_10", metrics::recall_at(&ranking, j, 10)),
        ];
        for (m, v) in got {
            let w = want[m].as_f64().unwrap();
            assert!((v - w).abs() < 1e-6, "{q} {m}: kerf {v}, trec_eval {w}");
            n += 1;
        }
    }
    assert_eq!(n, 9 * 6);
    let runs: Vec<(Vec<String>, &Judgments)> = expected["per_query"]
        .as_object()
        .unwrap()
        .keys()
        .map(|q| (metrics::rank_by_score(run[q].clone()), &qrels[q]))
        .collect();
    let s = metrics::summarize(runs.iter().map(|(r, j)| (r.as_slice(), *j)));
    let mean = &expected["mean"];
    for (m, v) in [
        ("recip_rank", s.mrr),
        ("recip_rank_at_10", s.mrr_at_10),
        ("ndcg_cut_10", s.ndcg_at_10),
        ("recall_1", s.recall_at_1),
        ("recall_10", s.recall_at_10),
    ] {
        assert!(
            (v - mean[m].as_f64().unwrap()).abs() < 1e-6,
            "mean {m}: kerf {v}, trec_eval {}",
            mean[m]
        );
    }
}
