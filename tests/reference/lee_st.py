"""Lee document-similarity check with sentence-transformers (PyPI).

Sources: sentence-transformers (PyPI; 6.3.0 when made) on torch (CPU, fp32; 2.15.0) and
transformers (5.24.0), numpy (2.4.6) for the cosine matrix and Pearson r; exact versions are
recorded in the fixture. Model: the local folder ~/.cache/kerf/models/all-MiniLM-L6-v2, offline.
Data: Lee, Pincombe & Welsh (2005), 50 news documents and the 50x50 matrix of mean human
similarity judgments, as shipped in the gensim 4.4.0 wheel's test data (lee.cor, Latin-1, and
similarities0-1.txt; fetched by scripts/fetch-testdata; see common.lee_docs for the split).
Computes: each document embedded whole by SentenceTransformer.encode (mean pooling,
normalised; truncated at max_seq_length), cosine matrix, and the Pearson correlation between
document cosines and human scores over the 1,225 pairs i < j (upper triangle), at
max_seq_length 256 (the model's default) and also 128 and 512.
Output: tests/fixtures/lee_st.json
"""
import json
import time

import numpy as np
from sentence_transformers import SentenceTransformer

from common import FIXTURES, MODEL_DIR, lee_docs, lee_human, versions

t0 = time.time()
docs, human = lee_docs(), np.array(lee_human())
model = SentenceTransformer(str(MODEL_DIR), device="cpu")
assert model.max_seq_length == 256
lens = [len(model.tokenizer(d, add_special_tokens=True, truncation=False)["input_ids"]) for d in docs]
iu = np.triu_indices(50, k=1)
out = {
    "source": "sentence-transformers on Lee, Pincombe & Welsh (2005), gensim 4.4.0 test data; Pearson r "
    "of document cosines vs mean human similarity over the upper-triangle pairs i<j",
    "versions": versions(),
    "pairs": int(len(iu[0])),
    "doc_tokens_with_specials": {"min": min(lens), "max": max(lens), "over_128": sum(l > 128 for l in lens),
                                 "over_256": sum(l > 256 for l in lens)},
}
for msl in (128, 256, 512):
    model.max_seq_length = msl
    v = model.encode(docs, batch_size=8, convert_to_numpy=True, normalize_embeddings=False)
    cos = v @ v.T
    r = float(np.corrcoef(cos[iu], human[iu])[0, 1])
    out[f"pearson_{msl}"] = r
    print(f"max_seq_length {msl}: Pearson {r:.4f}")
out["note"] = ("pearson_512 equals pearson_256 when no document exceeds 256 tokens (see doc_tokens_with_specials): "
               "nothing is truncated at either length")
(FIXTURES / "lee_st.json").write_text(json.dumps(out, indent=1) + "\n")
print(f"token lengths {min(lens)}..{max(lens)}; {time.time() - t0:.1f}s")
