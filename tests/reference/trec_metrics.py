"""Reference ranking metrics from trec_eval through pytrec-eval-terrier (PyPI).

Writes a small fixture run and qrels (TREC formats), then the per-query and mean values of
recip_rank, ndcg_cut_10, recall_1, recall_5 and recall_10. MRR@10 (`recip_rank_at_10`) is
trec_eval's recip_rank over the run cut to each query's top 10. The run has no tied scores, so
the ranking does not depend on trec_eval's tie order (score descending, then document id
descending).
Output: tests/fixtures/trec/{qrels.txt,run.txt,expected.json}
"""
import json
import random

import pytrec_eval

from common import FIXTURES, versions

rng = random.Random(20261202)
out_dir = FIXTURES / "trec"
out_dir.mkdir(parents=True, exist_ok=True)
docs = [f"d{i:02d}" for i in range(30)]
qrels, run = {}, {}
for q in range(1, 8):
    qid = f"q{q}"
    rel = rng.sample(docs, k=rng.randint(1, 4))
    qrels[qid] = {d: rng.choice([1, 2]) for d in rel}
    qrels[qid].update({d: 0 for d in rng.sample([d for d in docs if d not in rel], 3)})
    retrieved = rng.sample(docs, k=rng.randint(15, 20))
    scores = sorted(rng.sample(range(1000, 99999), len(retrieved)), reverse=True)
    run[qid] = {d: s / 1000.0 for d, s in zip(retrieved, scores)}
# One query whose relevant document is never retrieved.
qrels["q8"] = {"d99": 2}
run["q8"] = {d: (100 - i) / 10.0 for i, d in enumerate(docs[:15])}

# One query answered at rank 1, with a second relevant document lower down.
qrels["q9"] = {"d03": 2, "d07": 1, "d11": 0}
run["q9"] = {d: (100 - i) / 10.0 for i, d in enumerate(["d03", "d01", "d02", "d04", "d05", "d06", "d07", "d08", "d09"])}

(out_dir / "qrels.txt").write_text("".join(f"{q} 0 {d} {r}\n" for q in qrels for d, r in sorted(qrels[q].items())))
(out_dir / "run.txt").write_text(
    "".join(
        f"{q} Q0 {d} {rank} {s:.3f} fixture\n"
        for q in run
        for rank, (d, s) in enumerate(sorted(run[q].items(), key=lambda x: -x[1]), start=1)
    )
)
measures = {"recip_rank", "ndcg_cut_10", "recall_1", "recall_5", "recall_10"}
full = pytrec_eval.RelevanceEvaluator(qrels, measures).evaluate(run)
top10 = {q: dict(sorted(r.items(), key=lambda x: -x[1])[:10]) for q, r in run.items()}
cut = pytrec_eval.RelevanceEvaluator(qrels, {"recip_rank"}).evaluate(top10)
per_query = {q: {**{m: full[q][m] for m in sorted(full[q])}, "recip_rank_at_10": cut[q]["recip_rank"]} for q in sorted(full)}
keys = sorted(next(iter(per_query.values())))
mean = {k: sum(v[k] for v in per_query.values()) / len(per_query) for k in keys}
(out_dir / "expected.json").write_text(
    json.dumps({"source": "trec_eval via pytrec-eval-terrier", "versions": versions(), "per_query": per_query, "mean": mean}, indent=1) + "\n"
)
print(json.dumps(mean, indent=1))
