"""Reference token and sentence vectors of all-mpnet-base-v2 from sentence-transformers (PyPI),
and transformers' MPNet relative-position buckets.

Sources: sentence-transformers (PyPI; 6.3.0 when made) on torch (PyPI, CPU, fp32; 2.15.0) and
transformers (5.24.0), whose tokenizer here is the fast one (tokenizers 0.23.3); exact versions
are recorded in the fixture. Model: the local folder ~/.cache/kerf/models/all-mpnet-base-v2
(`scripts/fetch-model all-mpnet-base-v2`), loaded offline (HF_HUB_OFFLINE=1).
Computes:
* "buckets": MPNetEncoder.relative_position_bucket (transformers.models.mpnet.modeling_mpnet),
  the function the encoder calls with its defaults (32 buckets, max distance 128), for every
  key-minus-query distance from -600 to 600 ("bucket_distances" gives the range).
* per text, SentenceTransformer(model_dir, device="cpu").encode(text) with the folder's
  settings: max_seq_length 384 (sentence_bert_config.json; longer inputs are truncated to 384
  tokens including <s> and </s>), mean pooling (1_Pooling), L2 normalisation (2_Normalize in
  modules.json) -> "sentence"; and encode(text, output_value="token_embeddings") -> the last
  hidden state, of which the rows listed in "rows" are kept ("token_rows", same order) to keep
  the fixture small; "ids" are the input ids the model saw.
* one text at 512 tokens, the position table's limit (514 positions less the padding offset of
  2), encoded with max_seq_length raised to 512: the folder's configured 384 is less, so this
  text ("max_seq_length": 512) checks the positions and buckets beyond what the folder uses.
Vectors are rounded to 7 significant digits.
Output: tests/fixtures/mpnet_st.json
"""
import json
import time

import torch
from sentence_transformers import SentenceTransformer
from transformers.models.mpnet.modeling_mpnet import MPNetEncoder

from common import FIXTURES, KERF_HOME, TESTDATA, read_utf8, versions

MODEL_DIR = KERF_HOME / "models" / "all-mpnet-base-v2"

t0 = time.time()
model = SentenceTransformer(str(MODEL_DIR), device="cpu")
tok = model.tokenizer
assert model.max_seq_length == 384, model.max_seq_length
assert [type(m).__name__ for m in model] == ["Transformer", "Pooling", "Normalize"], model

distances = list(range(-600, 601))
buckets = MPNetEncoder.relative_position_bucket(torch.tensor(distances)).tolist()


def n_tokens(text):
    return len(tok(text, add_special_tokens=True, truncation=False)["input_ids"])


def rounded(v):
    return [float(f"{x:.7g}") for x in v]


# Runs of the Debian FAQ's words (fetched by scripts/fetch-testdata) from a given word on, cut
# word by word to reach a token count (a word of several tokens may pass it by a few).
faq = read_utf8(TESTDATA / "debian-faq" / "debian-faq.en.txt")
faq_words = faq.split()


def faq_text(start, target):
    words = faq_words[start:start + 2 * target]
    lo, hi = 1, len(words)
    while lo < hi:  # fewest words whose text has at least `target` tokens
        mid = (lo + hi) // 2
        if n_tokens(" ".join(words[:mid])) >= target:
            hi = mid
        else:
            lo = mid + 1
    return " ".join(words[:lo])


texts = [
    ("Hello.", 384),
    ("Where does the narrow-gauge line cross the river? Naïve café owners ate crème brûlée.", 384),
    (
        "The inspection found three defects. First, the drainage under the down line was blocked "
        "by ballast fines. Second, two fishplates on the check rail had cracked bolts. Third, the "
        "timber of the occupation crossing had rotted where the gate post meets the deck.",
        384,
    ),
    (faq_text(1000, 200), 384),  # beyond 128 tokens: the logarithmic buckets up to the last one
    (faq_text(3000, 384), 384),  # about the configured length
    (faq_text(5000, 450), 384),  # longer: truncated to 384 by both sides
    (faq_text(7000, 512), 512),  # the position limit, with max_seq_length raised (see above)
]

out = []
for text, max_len in texts:
    model.max_seq_length = max_len
    ids = tok(text, add_special_tokens=True, truncation=True, max_length=max_len)["input_ids"]
    sentence = model.encode(text, convert_to_numpy=True)
    token = model.encode(text, output_value="token_embeddings", convert_to_numpy=False)
    token = token.numpy()
    assert token.shape[0] == len(ids), (token.shape, len(ids))
    n = len(ids)
    rows = sorted(set(range(n)) if n <= 12 else {0, 1, 2, n // 4, n // 2, 3 * n // 4, n - 2, n - 1})
    out.append(
        {
            "text": text,
            "tokens_with_specials": n_tokens(text),
            "max_seq_length": max_len,
            "ids": ids,
            "rows": rows,
            "token_rows": [rounded(token[r]) for r in rows],
            "sentence": rounded(sentence),
        }
    )
model.max_seq_length = 384

doc = {
    "source": "sentence-transformers SentenceTransformer(all-mpnet-base-v2).encode, CPU fp32; "
    "transformers MPNetEncoder.relative_position_bucket",
    "versions": versions(),
    "model": "all-mpnet-base-v2",
    "max_seq_length": 384,
    "bucket_distances": [distances[0], distances[-1]],
    "buckets": buckets,
    "texts": out,
}
(FIXTURES / "mpnet_st.json").write_text(json.dumps(doc, separators=(",", ":")) + "\n")
print(f"{len(out)} texts, {sum(len(t['rows']) for t in out)} token rows, "
      f"lengths {[len(t['ids']) for t in out]}, {time.time() - t0:.1f} s")
