"""Reference sentence vectors from sentence-transformers (PyPI) with the same model folder.

SentenceTransformer(model_dir, device="cpu") with its defaults: max_seq_length 256 from
sentence_bert_config.json (longer inputs are truncated), mean pooling, L2 normalisation.
Texts: short and medium sentences, and texts built to be just under, exactly at, just over
256 tokens (specials included) and about 400 tokens.
Output: tests/fixtures/st_vectors.json
"""
import json

from sentence_transformers import SentenceTransformer

from common import FIXTURES, MODEL_DIR, lee_docs, versions

model = SentenceTransformer(str(MODEL_DIR), device="cpu")
tok = model.tokenizer


def n_tokens(text):
    return len(tok(text, add_special_tokens=True, truncation=False)["input_ids"])


texts = [
    "Hello.",
    "The boiler passed its hydraulic test.",
    "Where does the narrow-gauge line cross the river?",
    "Volunteers are asked to sign in at the booking office before their shift.",
    "Naïve café owners in Besançon ate crème brûlée.",
    "東京駅の北口で会いましょう。",
    "A train 🚂 left at 09:14, carrying 42 passengers and 3.5 tonnes of coal.",
    "Rail side-wear was measured at 0.42 mm per million gross tonnes on the tightest curve.",
    "The committee resolved, after a long debate about costs and the wet November, to delay the parapet repair until spring.",
]
texts += lee_docs()[:6]
words = ("the signal box at the top of the bank was rebuilt in stone with a slate roof and a new lever frame "
         "while the crossing keeper kept the gates shut for an hour ").split()
for target in (200, 255, 256, 257, 300, 400):
    t, i = "", 0
    while n_tokens(t) < target:
        t = (t + " " + words[i % len(words)]).strip()
        i += 1
    assert n_tokens(t) == target, (target, n_tokens(t))
    texts.append(t)

vecs = model.encode(texts, batch_size=8, convert_to_numpy=True, normalize_embeddings=False)
out = {
    "source": "sentence-transformers encode(), model folder all-MiniLM-L6-v2, max_seq_length "
    f"{model.max_seq_length}, CPU, fp32",
    "versions": versions(),
    "max_seq_length": model.max_seq_length,
    "texts": [
        {"text": t, "tokens_with_specials": n_tokens(t), "vector": [float(f"{x:.7g}") for x in v]}
        for t, v in zip(texts, vecs)
    ],
}
(FIXTURES / "st_vectors.json").write_text(json.dumps(out, ensure_ascii=False) + "\n", encoding="utf-8")
print(f"wrote {len(texts)} vectors; token lengths {[n_tokens(t) for t in texts]}")
