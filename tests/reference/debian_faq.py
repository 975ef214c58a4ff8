"""Long-document retrieval reference on the Debian FAQ with sentence-transformers (PyPI).

Sources: sentence-transformers (PyPI; 6.3.0 when made) on torch (CPU, fp32; 2.15.0) and
transformers (5.24.0; fast tokenizer, tokenizers 0.23.3), numpy (2.4.6) for cosines and MRR;
exact versions are recorded in the fixture. Model: the local folder
~/.cache/kerf/models/all-MiniLM-L6-v2, offline.
Data: Debian package debian-faq 11.1, /usr/share/doc/debian/FAQ/debian-faq.en.txt.gz, fetched
and gunzipped by scripts/fetch-testdata to testdata/debian-faq/debian-faq.en.txt.

Parse rule (kerf's Rust side reimplements it; body sha256s in the fixture check it):
  * The file is decoded as UTF-8 and split on "\\n" (it has no "\\r").
  * A chapter line is a line matching ^Chapter\\u00a0(\\d+)\\.\\u00a0(.*)$ exactly: at column 0,
    a no-break space (U+00A0) after "Chapter" and after "N.". The title is group 2, stripped.
    Everything before the first chapter line (title page, abstract, table of contents) is
    ignored. The table of contents is never mistaken for chapters or headings: its chapter
    entries read "1. Title" (no "Chapter"), its section entries are indented by four spaces
    and use ordinary spaces; only column-0 lines with the no-break space count.
  * A chapter runs from the line after its chapter line to the line before the next chapter
    line (or the end of the file).
  * Inside a chapter, a section heading starts at a line matching
    ^(\\d+\\.\\d+(?:\\.\\d+)?)\\.\\u00a0(.*)$ (N.M. or N.M.K., no-break space after the number's
    final dot) and continues over the following lines up to (not including) the next blank
    line, i.e. a line that is empty or only whitespace (wrapped headings). Its text is group 2
    and the continuation lines, each stripped of surrounding whitespace, joined with single
    spaces.
  * The chapter body is the chapter's remaining lines (everything except its heading lines,
    continuation lines included in "heading lines"), joined with "\\n", nothing stripped: it
    starts with the empty line after the chapter line and keeps indentation, blank lines,
    footnote rules (lines of dashes) and footnotes.
  * Every heading whose text ends in "?" is a query; its expected document is its chapter.
  Result on debian-faq 11.1: 16 chapters, 146 headings, 119 questions (chapters 15 and 16
  have none).

Plans (vectors L2-normalised, score = cosine; MRR over the full ranking of the 16 chapters,
rank = 1 + number of chapters scoring strictly higher than the expected one):
  1. truncation_256: each body embedded by SentenceTransformer.encode at max_seq_length 256
     (sentence-transformers truncates to [CLS] + 254 content tokens + [SEP]);
  2. token_128_o32_mean: the body's content tokens (fast tokenizer, no specials, no
     truncation) cut into windows of 126 content tokens (128 with [CLS]/[SEP]) at starts
     0, 94, 188, ... (overlap 32 tokens), a window starting at s only while s + 32 < n (or the
     single window [0, n) when n <= 126), so the last window may be shorter; each window's
     token ids [CLS] + ids + [SEP] are fed to the sentence-transformers model directly
     (Transformer -> mean Pooling -> Normalize modules, attention mask over real tokens; no
     decode and re-encode, so no drift); document vector = mean of window vectors,
     renormalised;
  3. token_128_o32_maxp: same windows, score = max cosine over the chapter's windows.
  For information only: token_128_o32_*_decoded, the same windows decoded to text with the
  tokenizer's decode() and re-embedded with encode() (what a text-chunk pipeline would do).
Queries are embedded with encode() at max_seq_length 256 (all are far shorter).
Output: tests/fixtures/debian_faq_st.json
"""
import json
import re
import time

import numpy as np
import torch
from sentence_transformers import SentenceTransformer

from common import FIXTURES, MODEL_DIR, TESTDATA, read_utf8, sha256, versions

t0 = time.time()
NB = "\u00a0"
text = read_utf8(TESTDATA / "debian-faq" / "debian-faq.en.txt")
assert "\r" not in text
lines = text.split("\n")
chapter_re = re.compile(rf"^Chapter{NB}(\d+)\.{NB}(.*)$")
heading_re = re.compile(rf"^(\d+\.\d+(?:\.\d+)?)\.{NB}(.*)$")

chapters, questions, n_headings = [], [], 0
cur = None
i = 0
while i < len(lines):
    line = lines[i]
    m = chapter_re.match(line)
    if m:
        cur = {"number": int(m.group(1)), "title": m.group(2).strip(), "lines": []}
        chapters.append(cur)
        i += 1
        continue
    if cur is not None:
        h = heading_re.match(line)
        if h:
            n_headings += 1
            parts = [h.group(2).strip()]
            i += 1
            while i < len(lines) and lines[i].strip():
                parts.append(lines[i].strip())
                i += 1
            title = " ".join(parts)
            if title.endswith("?"):
                questions.append({"section": h.group(1), "text": title, "chapter": cur["number"]})
            continue
        cur["lines"].append(line)
    i += 1
for c in chapters:
    c["body"] = "\n".join(c.pop("lines"))
print(f"{len(chapters)} chapters, {n_headings} headings, {len(questions)} questions")
assert [c["number"] for c in chapters] == list(range(1, 17)), [c["number"] for c in chapters]
assert len(questions) == 119, len(questions)
assert all(q["section"].split(".")[0] == str(q["chapter"]) for q in questions)

model = SentenceTransformer(str(MODEL_DIR), device="cpu")
assert model.max_seq_length == 256
assert [type(m).__name__ for m in model] == ["Transformer", "Pooling", "Normalize"]
model.eval()
tok = model.tokenizer
numbers = [c["number"] for c in chapters]
bodies = [c["body"] for c in chapters]
qv = model.encode([q["text"] for q in questions], convert_to_numpy=True)


def ranks(scores):
    """scores: questions x chapters -> 1-based rank of each question's expected chapter."""
    out = []
    for qi, q in enumerate(questions):
        s = scores[qi]
        want = s[numbers.index(q["chapter"])]
        out.append(1 + int((s > want).sum()))
    return out


def mrr(r):
    return float(np.mean([1.0 / x for x in r]))


def embed_ids(windows, batch=16):
    """sentence-transformers modules on given token ids (each window already has [CLS]/[SEP])."""
    out = []
    with torch.no_grad():
        for k in range(0, len(windows), batch):
            b = windows[k : k + batch]
            L = max(len(w) for w in b)
            ids = torch.zeros((len(b), L), dtype=torch.long)
            mask = torch.zeros((len(b), L), dtype=torch.long)
            for r, w in enumerate(b):
                ids[r, : len(w)] = torch.tensor(w)
                mask[r, : len(w)] = 1
            feats = {"input_ids": ids, "attention_mask": mask, "token_type_ids": torch.zeros_like(ids)}
            out.append(model(feats)["sentence_embedding"].numpy())
    return np.concatenate(out)


# The ids path equals encode() on a text whose tokens it is given.
probe = "How do I install Debian from CD-ROMs? Use the installer images."
pv = embed_ids([tok(probe)["input_ids"]])[0]
assert float(pv @ model.encode(probe)) > 0.99999

dv = model.encode(bodies, convert_to_numpy=True)
r_trunc = ranks(qv @ dv.T)

cls_id, sep_id = tok.cls_token_id, tok.sep_token_id
WIN, OVERLAP = 128, 32
BUDGET, STRIDE = WIN - 2, WIN - 2 - OVERLAP  # 126 content tokens, stride 94
res = {k: np.zeros((len(questions), len(chapters))) for k in ("mean", "maxp", "mean_dec", "maxp_dec")}
content_tokens, windows_per_chapter = [], []
for j, b in enumerate(bodies):
    ids = tok(b, add_special_tokens=False, truncation=False)["input_ids"]
    n = len(ids)
    content_tokens.append(n)
    starts = [0] if n <= BUDGET else list(range(0, n - OVERLAP, STRIDE))
    assert starts[-1] + BUDGET >= n and all(s < n for s in starts)
    wins = [ids[s : s + BUDGET] for s in starts]
    windows_per_chapter.append(len(wins))
    for suffix, cv in (
        ("", embed_ids([[cls_id] + w + [sep_id] for w in wins])),
        ("_dec", model.encode([tok.decode(w) for w in wins], convert_to_numpy=True)),
    ):
        d = cv.mean(0)
        d /= np.linalg.norm(d)
        res["mean" + suffix][:, j] = qv @ d
        res["maxp" + suffix][:, j] = (qv @ cv.T).max(1)

rk = {
    "truncation_256": r_trunc,
    "token_128_o32_mean": ranks(res["mean"]),
    "token_128_o32_maxp": ranks(res["maxp"]),
    "token_128_o32_mean_decoded": ranks(res["mean_dec"]),
    "token_128_o32_maxp_decoded": ranks(res["maxp_dec"]),
}
out = {
    "source": "sentence-transformers on the Debian FAQ (Debian package debian-faq 11.1, debian-faq.en.txt); "
    "parse rule and plans in tests/reference/debian_faq.py's header",
    "versions": versions(),
    "plans": {
        "truncation_256": "whole body, encode() at max_seq_length 256 (truncated)",
        "token_128_o32_mean": "128-token windows incl. [CLS]/[SEP] (126 content tokens), overlap 32, stride 94, "
        "token ids fed to the model directly; mean of window vectors, renormalised",
        "token_128_o32_maxp": "same windows; max cosine over the chapter's windows",
        "token_128_o32_mean_decoded": "information only: windows decoded to text and re-encoded",
        "token_128_o32_maxp_decoded": "information only: windows decoded to text and re-encoded",
    },
    "mrr": {k: mrr(v) for k, v in rk.items()},
    "hits_at_1": {k: sum(x == 1 for x in v) for k, v in rk.items()},
    "chapters": [
        {"number": c["number"], "title": c["title"], "body_sha256": sha256(c["body"]), "content_tokens": n, "windows": w}
        for c, n, w in zip(chapters, content_tokens, windows_per_chapter)
    ],
    "headings": n_headings,
    "questions": [
        {**q, "rank": {k: v[qi] for k, v in rk.items() if not k.endswith("_decoded")}} for qi, q in enumerate(questions)
    ],
}
for k, v in out["mrr"].items():
    print(f"{k}: MRR {v:.4f}, hits@1 {out['hits_at_1'][k]}/{len(questions)}")
print(f"content tokens {sum(content_tokens)}, windows {sum(windows_per_chapter)}; {time.time() - t0:.1f}s")
(FIXTURES / "debian_faq_st.json").write_text(json.dumps(out, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
