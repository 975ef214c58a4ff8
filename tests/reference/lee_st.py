"""Lee document-similarity check with sentence-transformers (PyPI).

Data: Lee, Pincombe & Welsh (2005), 50 news documents and a 50x50 matrix of mean human
similarity judgments, as shipped in the gensim 4.4.0 wheel's test data (fetched by
scripts/fetch-testdata). Each document is embedded with sentence-transformers (truncating at
max_seq_length); the Pearson correlation between document cosines and human scores is taken
over the 1,225 pairs i < j.
Output: tests/fixtures/lee_st.json
"""
import json

import numpy as np
from sentence_transformers import SentenceTransformer

from common import FIXTURES, MODEL_DIR, lee_docs, lee_human, versions

docs, human = lee_docs(), np.array(lee_human())
model = SentenceTransformer(str(MODEL_DIR), device="cpu")
iu = np.triu_indices(50, k=1)
out = {"source": "sentence-transformers on Lee et al. (2005), gensim 4.4.0 test data", "versions": versions(), "pairs": int(len(iu[0]))}
for msl in (128, 256, 512):
    model.max_seq_length = msl
    v = model.encode(docs, batch_size=8, convert_to_numpy=True, normalize_embeddings=True)
    cos = v @ v.T
    r = float(np.corrcoef(cos[iu], human[iu])[0, 1])
    out[f"pearson_{msl}"] = r
    print(msl, r)
(FIXTURES / "lee_st.json").write_text(json.dumps(out, indent=1) + "\n")
