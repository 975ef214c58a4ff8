"""Reference sentence vectors from sentence-transformers (PyPI) with the same model folder.

Sources: sentence-transformers (PyPI; 6.3.0 when made) on torch (PyPI, CPU, fp32; 2.15.0) and
transformers (5.24.0), whose tokenizer here is the fast one (tokenizers 0.23.3); exact versions
are recorded in the fixture. Model: the local folder ~/.cache/kerf/models/all-MiniLM-L6-v2
(scripts/fetch-model), loaded offline (HF_HUB_OFFLINE=1).
Computes: SentenceTransformer(model_dir, device="cpu").encode(texts) with its defaults from the
folder: max_seq_length 256 from sentence_bert_config.json (longer inputs are truncated to 256
tokens including [CLS]/[SEP]), mean pooling (1_Pooling), L2 normalisation (2_Normalize in
modules.json). Vectors are rounded to 7 significant digits.
Texts: short and medium sentences (accents, CJK, emoji, numbers, CRLF, a 300-character word,
a few Lee documents), and texts built word by word to be exactly 200, 254, 255, 256, 257, 300
and 400 tokens long with specials ("tokens_with_specials" is the untruncated length).
Output: tests/fixtures/st_vectors.json
"""
import json
import time

from sentence_transformers import SentenceTransformer

from common import FIXTURES, MODEL_DIR, lee_docs, versions

t0 = time.time()
model = SentenceTransformer(str(MODEL_DIR), device="cpu")
tok = model.tokenizer
assert model.max_seq_length == 256, model.max_seq_length
assert [type(m).__name__ for m in model] == ["Transformer", "Pooling", "Normalize"], model


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
    "Is signal 4B at danger?",
    "First line.\r\nSecond line.\r\n\r\nA new paragraph after a CRLF blank line.",
    "x" * 300 + " is a very long word, then a normal sentence follows it.",
    "The inspection found three defects.\n\nFirst, the drainage under the down line was blocked by ballast "
    "fines. Second, two fishplates on the check rail had cracked bolts. Third, the timber of the "
    "occupation crossing had rotted where the gate post meets the deck. All three were booked for "
    "repair before the Easter timetable, and the speed restriction stays until then.",
    "Ελληνικά, русский текст and Deutsch: Straße, Übermaß — with “curly quotes” and an ellipsis…",
]
texts += lee_docs()[:6]
words = ("the signal box at the top of the bank was rebuilt in stone with a slate roof and a new lever frame "
         "while the crossing keeper kept the gates shut for an hour ").split()
for target in (200, 254, 255, 256, 257, 300, 400):
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
    "modules": [type(m).__name__ for m in model],
    "texts": [
        {"text": t, "tokens_with_specials": n_tokens(t), "vector": [float(f"{x:.7g}") for x in v]}
        for t, v in zip(texts, vecs)
    ],
}
(FIXTURES / "st_vectors.json").write_text(json.dumps(out, ensure_ascii=False) + "\n", encoding="utf-8")
print(f"wrote {len(texts)} vectors in {time.time() - t0:.1f}s; token lengths {[n_tokens(t) for t in texts]}")
