"""Reference content-token counts from a pure-Python WordPiece.

Source: transformers (PyPI; version recorded in the fixture, 5.24.0 when made) class
`BertTokenizerLegacy` from transformers.models.bert.tokenization_bert_legacy, a subclass of the
pure-Python `PythonBackend` (in transformers 4 the same code is the slow `BertTokenizer`). It
is independent of the Rust `tokenizers` crate kerf uses; the script asserts it is not a
PreTrainedTokenizerFast / tokenizers-backed object. It reads the model folder's vocab.txt
(all-MiniLM-L6-v2, made by scripts/fetch-model) with lower-casing on, accents stripped with
lower-casing and CJK characters split, as the model's tokenizer_config.json says.
Computes: len(tokenizer.tokenize(text)), i.e. content tokens: no [CLS]/[SEP], no truncation,
no padding (words over 100 characters become one [UNK], as in any BERT WordPiece).

Inputs, each read as raw UTF-8 bytes with no newline translation (sha256 of those bytes):
  * every demo-texts/*.md and *.txt file (name "demo-texts/<file>");
  * the 50 Lee documents, gensim 4.4.0 test data lee.cor (Latin-1; see common.lee_docs),
    name "lee:<index>", sha256 of the document's UTF-8 encoding;
  * a few tricky strings, stored inline ("text") in the fixture, name "tricky:<label>".
Output: tests/fixtures/token_counts.json
"""
import json
import time

from common import FIXTURES, MODEL_DIR, REPO, lee_docs, read_utf8, sha256, versions

try:
    from transformers.models.bert.tokenization_bert_legacy import BertTokenizerLegacy as Slow
except ImportError:  # transformers 4: the slow tokenizer is BertTokenizer itself
    from transformers import BertTokenizer as Slow
from transformers import PreTrainedTokenizerFast

t0 = time.time()
tok = Slow(str(MODEL_DIR / "vocab.txt"), do_lower_case=True)
# Really the pure-Python one: not a fast tokenizer, no Rust tokenizer object behind it.
assert not isinstance(tok, PreTrainedTokenizerFast), type(tok).__mro__
assert not getattr(tok, "is_fast", False), type(tok)
assert getattr(tok, "_tokenizer", None) is None, "backed by the Rust tokenizers crate"
assert not any(c.__module__.startswith("tokenizers") for c in type(tok).__mro__)
assert type(tok.wordpiece_tokenizer).__module__.startswith("transformers."), type(tok.wordpiece_tokenizer)


def count(text: str) -> int:
    return len(tok.tokenize(text))


TRICKY = {
    "accents": "Naïve café owners in Besançon ate crème brûlée; Ångström, Wójcik and Siân agreed.",
    "cjk": "東京駅の北口で会いましょう。北京大学は有名です。",
    "hangul": "서울역에서 만나요, 한국어 문장입니다.",
    "emoji": "Family 👩‍👩‍👧‍👦 and flags 🇫🇷🇬🇧, a train 🚂 and a thumbs up 👍🏽.",
    "crlf": "First line.\r\nSecond line.\r\n\r\nNew paragraph.",
    "long-word": "x" * 300 + " then " + "pneumonoultramicroscopicsilicovolcanoconiosis" * 2 + " end",
    "numbers": "Pressure 160.5 psi, 3.5 mm, v1.2.3, £184,000 and 1,025.75 kg at 09:14:07; -0.25e-3 and 1/3.",
    "control": "tab\there, nul-free; soft\u00adhyphen and zero\u200bwidth space.",
    "punctuation": "Well—“quoted”… (brackets) [square] {curly} <angle> «guillemets» it's O'Brien's, e.g. i.e.",
    "whitespace": "  leading and trailing  \n\n\u00a0no-break\u2003em-space\u3000ideographic  ",
    "mixed-script": "Ελληνικά, русский текст, עברית, العربية, हिन्दी and Deutsch: Straße, Übermaß.",
    "empty": "",
}

texts = []
demo = sorted(p for p in (REPO / "demo-texts").glob("*") if p.is_file() and p.suffix in (".md", ".txt"))
for p in demo:
    t = read_utf8(p)
    texts.append({"name": f"demo-texts/{p.name}", "sha256": sha256(t), "content_tokens": count(t)})
for i, t in enumerate(lee_docs()):
    texts.append({"name": f"lee:{i}", "sha256": sha256(t), "content_tokens": count(t)})
for k, t in TRICKY.items():
    texts.append({"name": f"tricky:{k}", "text": t, "sha256": sha256(t), "content_tokens": count(t)})

out = {
    "source": "pure-Python WordPiece (transformers BertTokenizerLegacy) over the model folder's vocab.txt, "
    "lower-casing on; content tokens only (no [CLS]/[SEP], no truncation, no padding). Files are read as "
    "raw UTF-8 bytes; Lee documents are lee.cor lines decoded as Latin-1.",
    "tokenizer": f"{type(tok).__module__}.{type(tok).__name__} (transformers {versions().get('transformers')})",
    "versions": versions(),
    "texts": texts,
}
(FIXTURES / "token_counts.json").write_text(json.dumps(out, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
print(f"wrote {len(texts)} counts ({len(demo)} demo texts) in {time.time() - t0:.1f}s")
for t in texts:
    if not t["name"].startswith("lee:"):
        print(f"  {t['name']}: {t['content_tokens']}")
