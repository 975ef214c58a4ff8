"""Reference content-token counts from a pure-Python WordPiece.

Source: transformers (PyPI) `BertTokenizerLegacy` (transformers 5; in transformers 4 the slow
`BertTokenizer`), an implementation independent of the Rust `tokenizers` crate kerf uses. It
reads the model folder's vocab.txt with lower-casing on, as the model's tokenizer.json does.
Counts exclude [CLS]/[SEP]; no truncation, no padding.

Inputs: every demo-texts/*.md and *.txt file, the 50 Lee documents (gensim 4.4.0 test data),
and a few tricky strings kept inline in the fixture.
Output: tests/fixtures/token_counts.json
"""
import json

from common import FIXTURES, MODEL_DIR, REPO, lee_docs, sha256, versions

try:
    from transformers.models.bert.tokenization_bert_legacy import BertTokenizerLegacy as Slow
except ImportError:  # transformers 4
    from transformers import BertTokenizer as Slow

tok = Slow(str(MODEL_DIR / "vocab.txt"), do_lower_case=True)
assert not getattr(tok, "is_fast", False), "must be the pure-Python tokenizer"


def count(text: str) -> int:
    return len(tok.tokenize(text))


TRICKY = {
    "accents": "Naïve café owners in Besançon ate crème brûlée; Ångström, Wójcik and Siân agreed.",
    "cjk": "東京駅の北口で会いましょう。北京大学は有名です。",
    "emoji": "Family 👩‍👩‍👧‍👦 and flags 🇫🇷🇬🇧, a train 🚂 and a thumbs up 👍🏽.",
    "crlf": "First line.\r\nSecond line.\r\n\r\nNew paragraph.",
    "long-word": "x" * 300 + " then " + "pneumonoultramicroscopicsilicovolcanoconiosis" * 2 + " end",
    "numbers": "Pressure 160.5 psi, 3.5 mm, v1.2.3, £184,000 and 1,025.75 kg at 09:14:07.",
    "control": "tab\there, nul-free; soft\u00adhyphen and zero\u200bwidth space.",
}

texts = []
for p in sorted((REPO / "demo-texts").glob("*")):
    if p.suffix in (".md", ".txt"):
        t = p.read_text(encoding="utf-8")
        texts.append({"name": f"demo-texts/{p.name}", "sha256": sha256(t), "content_tokens": count(t)})
for i, t in enumerate(lee_docs()):
    texts.append({"name": f"lee:{i}", "sha256": sha256(t), "content_tokens": count(t)})
for k, t in TRICKY.items():
    texts.append({"name": f"tricky:{k}", "text": t, "sha256": sha256(t), "content_tokens": count(t)})

out = {
    "source": "pure-Python WordPiece over the model's vocab.txt, lower-casing on",
    "tokenizer": f"{type(tok).__name__} (transformers {versions().get('transformers')})",
    "texts": texts,
}
(FIXTURES / "token_counts.json").write_text(json.dumps(out, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
print(f"wrote {len(texts)} counts")
