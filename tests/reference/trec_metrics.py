"""Reference ranking metrics from trec_eval, through pytrec-eval-terrier (PyPI).

Source: pytrec-eval-terrier (PyPI; 0.5.11 when made; version recorded in the fixture), the
Python binding of NIST's trec_eval. Nothing else is used.
Writes a small hand-made fixture in the TREC formats, then trec_eval's values for it:
  * qrels.txt, `qid 0 docid rel`, graded 0-2 (0 = judged non-relevant);
  * run.txt, `qid Q0 docid rank score tag`, 15-20 documents per query, no tied scores inside a
    query, rank = position by score descending;
  * expected.json, per query and mean over queries, of recip_rank, ndcg_cut_10, recall_1,
    recall_5 and recall_10 on the full run, and `recip_rank_at_10` = trec_eval's recip_rank
    on the run cut to each query's 10 best-scored documents (MRR@10).
Each query exercises a case: hit at rank 1, judged-0 above the first hit, several relevant
documents, first hit below rank 10, a relevant document never retrieved, grades out of ideal
order, hits on the rank-5/6 and rank-10/11 boundaries, more relevant documents than 10.
The script also probes trec_eval's order for tied scores on a side run (not in the fixture)
and records what it sees under "tie_order_observed".
Output: tests/fixtures/trec/{qrels.txt,run.txt,expected.json}
"""
import json

import pytrec_eval

from common import FIXTURES, versions

out_dir = FIXTURES / "trec"
out_dir.mkdir(parents=True, exist_ok=True)

# Per query: (retrieved docids in rank order, {docid: grade} judgments, score of rank 1).
# Documents not listed in the judgments are unjudged (count as non-relevant).
D = lambda *ns: [f"d{n:02d}" for n in ns]
QUERIES = {
    # Hit at rank 1 (grade 2), a second relevant document at rank 6.
    "q1": (D(3, 1, 2, 4, 5, 17, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15), {"d03": 2, "d17": 1, "d01": 0}, 0.912),
    # A judged non-relevant document at rank 1, the only relevant one at rank 2.
    "q2": (D(1, 5, 2, 3, 4, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15), {"d01": 0, "d05": 1, "d02": 0}, 0.874),
    # Several relevant documents (ranks 3, 4, 9, 14) and one never retrieved (d25).
    "q3": (D(40, 41, 2, 8, 42, 43, 44, 45, 11, 46, 47, 48, 49, 20, 50, 51, 52, 53),
           {"d02": 2, "d08": 2, "d11": 1, "d20": 1, "d25": 2, "d40": 0}, 0.951),
    # First relevant document at rank 12, another at rank 17: MRR@10, recall@10 and nDCG@10 are 0.
    "q4": (D(60, 61, 62, 63, 64, 65, 66, 67, 68, 69, 70, 14, 71, 72, 73, 74, 30, 75, 76, 77),
           {"d14": 1, "d30": 2, "d60": 0, "d61": 0}, 0.803),
    # The only relevant document is never retrieved.
    "q5": (D(1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15), {"d99": 2, "d01": 0, "d02": 0}, 0.655),
    # Ranks 1-3 relevant with grades 1, 2, 2 (not the ideal order), another at rank 10.
    "q6": (D(21, 22, 23, 24, 25, 26, 27, 28, 29, 40, 31, 32, 33, 34, 35, 36, 37),
           {"d21": 1, "d22": 2, "d23": 2, "d40": 1, "d24": 0}, 0.988),
    # Relevant at ranks 5 and 6: one inside recall@5, one just outside.
    "q7": (D(80, 81, 82, 83, 84, 85, 86, 87, 88, 89, 90, 91, 92, 93, 94, 95, 96, 97, 98),
           {"d84": 2, "d85": 1, "d80": 0}, 0.842),
    # Relevant at ranks 10 and 11: the first counts for MRR@10, the second does not.
    "q8": (D(50, 51, 52, 53, 54, 55, 56, 57, 58, 59, 60, 61, 62, 63, 64, 65),
           {"d59": 2, "d60": 1}, 0.777),
    # Twelve relevant documents: the top 10 are all relevant (mixed grades), recall@10 is 10/12.
    "q9": (D(1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20),
           {**{f"d{n:02d}": 1 for n in (1, 3, 4, 6, 8, 9, 10)}, **{f"d{n:02d}": 2 for n in (2, 5, 7, 30, 31)}}, 0.999),
}

qrels, run, lines_q, lines_r = {}, {}, [], []
for q, (docs, judg, top) in QUERIES.items():
    assert 15 <= len(docs) <= 20 and len(set(docs)) == len(docs), q
    qrels[q] = dict(judg)
    # Distinct, strictly decreasing scores with three decimals.
    run[q] = {d: round(top - 0.0371 * i, 3) for i, d in enumerate(docs)}
    assert len(set(run[q].values())) == len(docs) and min(run[q].values()) > 0, q
    lines_q += [f"{q} 0 {d} {r}\n" for d, r in sorted(judg.items())]
    lines_r += [f"{q} Q0 {d} {i} {run[q][d]:.3f} kerf-fixture\n" for i, d in enumerate(docs, start=1)]
(out_dir / "qrels.txt").write_text("".join(lines_q))
(out_dir / "run.txt").write_text("".join(lines_r))

measures = {"recip_rank", "ndcg_cut_10", "recall_1", "recall_5", "recall_10"}
full = pytrec_eval.RelevanceEvaluator(qrels, measures).evaluate(run)
top10 = {q: dict(sorted(r.items(), key=lambda x: -x[1])[:10]) for q, r in run.items()}
cut = pytrec_eval.RelevanceEvaluator(qrels, {"recip_rank"}).evaluate(top10)
per_query = {
    q: {**{m: full[q][m] for m in sorted(full[q])}, "recip_rank_at_10": cut[q]["recip_rank"]} for q in sorted(full)
}
keys = sorted(next(iter(per_query.values())))
mean = {k: sum(v[k] for v in per_query.values()) / len(per_query) for k in keys}
# pytrec_eval's own aggregate (trec_eval -m all_trec style mean) agrees with the plain mean.
agg = {m: pytrec_eval.compute_aggregated_measure(m, [full[q][m] for q in full]) for m in measures}
assert all(abs(agg[m] - mean[m]) < 1e-12 for m in measures)


# Tie probe: three documents with the same score, one relevant; where trec_eval puts it tells
# the tie order. Then the same with numeric-looking ids to see whether ids compare as strings.
def rr(docs_scores, relevant):
    return pytrec_eval.RelevanceEvaluator({"t": {relevant: 1}}, {"recip_rank"}).evaluate({"t": docs_scores})["t"]["recip_rank"]


probe = {
    "three docs a,b,c tied, a relevant": rr({"a": 1.0, "b": 1.0, "c": 1.0}, "a"),
    "three docs a,b,c tied, c relevant": rr({"a": 1.0, "b": 1.0, "c": 1.0}, "c"),
    "d9,d10 tied, d9 relevant": rr({"d9": 1.0, "d10": 1.0}, "d9"),
    "d9,d10 tied, d10 relevant": rr({"d9": 1.0, "d10": 1.0}, "d10"),
    "higher score wins over docid: a=2.0, z=1.0, a relevant": rr({"a": 2.0, "z": 1.0}, "a"),
}
desc = probe["three docs a,b,c tied, c relevant"] == 1.0 and probe["three docs a,b,c tied, a relevant"] == 1 / 3
lexical = probe["d9,d10 tied, d9 relevant"] == 1.0  # "d9" > "d10" as strings
tie_note = (
    "trec_eval ranks a query's documents by score descending, ties broken by docid descending "
    "(byte-wise string comparison, so 'd9' ranks before 'd10')"
    if desc and lexical and probe["higher score wins over docid: a=2.0, z=1.0, a relevant"] == 1.0
    else "unexpected tie order: see probe"
) + "; the run's rank column is not used. The fixture run has no tied scores within a query."

(out_dir / "expected.json").write_text(
    json.dumps(
        {
            "source": "trec_eval via pytrec-eval-terrier on qrels.txt/run.txt; recip_rank_at_10 is recip_rank on "
            "the run cut to each query's top 10 by score; relevance level 1 (grade >= 1 is relevant); "
            "ndcg_cut_10 gains are the grades",
            "versions": versions(),
            "tie_order_observed": tie_note,
            "tie_probe_recip_rank": probe,
            "per_query": per_query,
            "mean": mean,
        },
        indent=1,
    )
    + "\n"
)
print(tie_note)
for q, v in per_query.items():
    print(q, {k: round(x, 4) for k, x in v.items()})
print("mean", {k: round(x, 4) for k, x in mean.items()})
