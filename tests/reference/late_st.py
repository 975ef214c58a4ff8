"""Late-chunking reference: chunk vectors pooled from sentence-transformers' token embeddings.

Sources: sentence-transformers (PyPI; 6.3.0 when made) on torch (CPU, fp32; 2.15.0) and
transformers (5.24.0; fast tokenizer, tokenizers 0.23.3); exact versions are recorded in the
fixture. Model: the local folder ~/.cache/kerf/models/all-MiniLM-L6-v2, offline, with
max_seq_length raised to 512 (the model's positions) so nothing is truncated.
Method: late chunking (Guenther et al. 2024, arXiv 2409.04701): each text is encoded once and
each chunk's vector is the mean of its own token rows from that one pass, L2-normalised.
Token rows: SentenceTransformer.encode(text, output_value="token_embeddings"), which returns the
transformer's last hidden state for every token, [CLS] and [SEP] included, before pooling.
A chunk owns the tokens whose first character lies in its character range (the fast
tokenizer's offset_mapping); the first chunk also takes [CLS], the last takes [SEP] (the
paper's choice; kerf's rule too).
Data: the Debian FAQ (package debian-faq 11.1, testdata/debian-faq/debian-faq.en.txt from
scripts/fetch-testdata). Texts are runs of whole paragraphs (split on blank lines) starting at
fixed paragraphs, grown while they stay under 500 tokens; each paragraph is one chunk, its
range trimmed of surrounding whitespace. One text is a single paragraph: a chunk that is the
whole pass. Ranges are written as UTF-8 byte offsets (the text has no-break spaces, so byte
and character offsets differ).
Vectors are rounded to 6 significant digits.
Output: tests/fixtures/late_st.json
"""
import json
import re
import time

import numpy as np
from sentence_transformers import SentenceTransformer

from common import FIXTURES, MODEL_DIR, TESTDATA, read_utf8, versions

t0 = time.time()
model = SentenceTransformer(str(MODEL_DIR), device="cpu")
model.max_seq_length = 512
tok = model.tokenizer

faq = read_utf8(TESTDATA / "debian-faq" / "debian-faq.en.txt")
# Paragraphs as (start, end) character ranges, trimmed of whitespace.
paras = []
for m in re.finditer(r"\S(?:.*?\S)?(?=\n[ \t]*\n|\s*\Z)", faq, flags=re.S):
    paras.append((m.start(), m.end()))


def n_tokens(text):
    return len(tok(text, add_special_tokens=True, truncation=False)["input_ids"])


texts = []
for first in (40, 260, 610):
    start = paras[first][0]
    end = paras[first][1]
    k = first + 1
    while k < len(paras) and n_tokens(faq[start:paras[k][1]]) < 500:
        end = paras[k][1]
        k += 1
    texts.append((faq[start:end], [(a - start, b - start) for a, b in paras[first:k]]))
# A single paragraph: the chunk is the whole pass.
a, b = paras[150]
texts.append((faq[a:b], [(0, b - a)]))


def byte_offset(text, i):
    return len(text[:i].encode("utf-8"))


out_texts = []
for text, chunks in texts:
    enc = tok(text, add_special_tokens=True, truncation=False, return_offsets_mapping=True)
    ids, offsets = enc["input_ids"], enc["offset_mapping"]
    assert len(ids) <= 512, len(ids)
    rows = model.encode(text, output_value="token_embeddings", convert_to_numpy=False)
    rows = rows.float().numpy()
    assert rows.shape[0] == len(ids), (rows.shape, len(ids))
    special = [i for i, (a, b) in enumerate(offsets) if a == b == 0]
    assert special == [0, len(ids) - 1], special
    vectors = []
    for c, (cs, ce) in enumerate(chunks):
        own = [i for i, (a, b) in enumerate(offsets) if i not in special and cs <= a < ce]
        if c == 0:
            own = [0] + own
        if c == len(chunks) - 1:
            own = own + [len(ids) - 1]
        v = rows[own].mean(axis=0)
        v = v / np.linalg.norm(v)
        vectors.append([float(f"{x:.6g}") for x in v])
    out_texts.append(
        {
            "text": text,
            "tokens_with_specials": len(ids),
            "chunks": [[byte_offset(text, a), byte_offset(text, b)] for a, b in chunks],
            "vectors": vectors,
        }
    )

out = {
    "source": "sentence-transformers encode(output_value='token_embeddings'), model folder "
    "all-MiniLM-L6-v2, max_seq_length 512, CPU, fp32; chunk rows mean-pooled and L2-normalised",
    "versions": versions(),
    "texts": out_texts,
}
(FIXTURES / "late_st.json").write_text(json.dumps(out, ensure_ascii=False) + "\n", encoding="utf-8")
print(
    f"wrote {len(out_texts)} texts, {sum(len(t['chunks']) for t in out_texts)} chunk vectors in "
    f"{time.time() - t0:.1f}s; tokens {[t['tokens_with_specials'] for t in out_texts]}"
)
