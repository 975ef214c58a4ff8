"""Long-document retrieval reference on the Debian FAQ with sentence-transformers (PyPI).

Data: Debian package debian-faq 11.1, /usr/share/doc/debian/FAQ/debian-faq.en.txt.gz (fetched
by scripts/fetch-testdata). Parse rule (kerf's Rust test implements the same):
  * a chapter starts at a line `Chapter N. Title` at column 0 (the separator after `Chapter` and
    after `N.` is a no-break space, U+00A0); it runs to the next chapter line or the end;
  * the table of contents is indented, so only column-0 lines count;
  * a section heading is a column-0 line `N.M. Title` or `N.M.K. Title` (no-break space after
    the number) plus the following lines up to the next blank line (wrapped headings), joined
    with single spaces;
  * a chapter's document text is its lines after the chapter line with section-heading lines
    removed; every heading ending in `?` is a query whose expected document is its chapter.
Plans (mean pooling, normalised vectors, cosine; MRR over the full ranking of chapters):
  1. truncation: each chapter embedded whole by sentence-transformers at max_seq_length 256;
  2. token windows of 128 tokens including [CLS]/[SEP] (126 content tokens), overlap 32, stride
     94, over the chapter's content tokens; each window's token ids are fed to the model
     directly (no decode/re-encode drift); document vector = mean of window vectors;
  3. MaxP: score = max cosine over the chapter's windows.
Output: tests/fixtures/debian_faq_st.json
"""
import json
import re

import numpy as np
import torch
from sentence_transformers import SentenceTransformer

from common import FIXTURES, MODEL_DIR, TESTDATA, sha256, versions

NB = "\u00a0"
lines = (TESTDATA / "debian-faq" / "debian-faq.en.txt").read_text(encoding="utf-8").split("\n")
chapter_re = re.compile(rf"^Chapter{NB}(\d+)\.{NB}(.*)$")
heading_re = re.compile(rf"^(\d+\.\d+(?:\.\d+)?)\.{NB}(.*)$")

chapters, questions = [], []
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
print(len(chapters), "chapters,", len(questions), "questions")

model = SentenceTransformer(str(MODEL_DIR), device="cpu")
tok = model.tokenizer
model.max_seq_length = 256
bodies = [c["body"] for c in chapters]
qv = model.encode([q["text"] for q in questions], convert_to_numpy=True, normalize_embeddings=True)


def mrr(scores):
    # scores: questions x chapters
    total = 0.0
    for qi, q in enumerate(questions):
        order = np.argsort(-scores[qi], kind="stable")
        rank = [chapters[j]["number"] for j in order].index(q["chapter"]) + 1
        total += 1.0 / rank
    return total / len(questions)


dv = model.encode(bodies, convert_to_numpy=True, normalize_embeddings=True)
trunc = mrr(qv @ dv.T)

cls_id, sep_id = tok.cls_token_id, tok.sep_token_id
transformer = model[0].auto_model


def embed_ids(windows):
    out = []
    with torch.no_grad():
        for k in range(0, len(windows), 16):
            batch = windows[k : k + 16]
            L = max(len(w) for w in batch)
            ids = torch.zeros((len(batch), L), dtype=torch.long)
            mask = torch.zeros((len(batch), L), dtype=torch.long)
            for r, w in enumerate(batch):
                ids[r, : len(w)] = torch.tensor(w)
                mask[r, : len(w)] = 1
            h = transformer(input_ids=ids, attention_mask=mask).last_hidden_state
            m = mask.unsqueeze(-1).float()
            v = (h * m).sum(1) / m.sum(1)
            out.append(torch.nn.functional.normalize(v, dim=-1).numpy())
    return np.concatenate(out)


mean_scores = np.zeros((len(questions), len(chapters)))
max_scores = np.zeros_like(mean_scores)
content_tokens = []
windows_per_chapter = []
for j, b in enumerate(bodies):
    ids = tok(b, add_special_tokens=False, truncation=False)["input_ids"]
    content_tokens.append(len(ids))
    budget, stride = 126, 126 - 32
    starts = list(range(0, max(1, len(ids) - 32), stride)) if len(ids) > budget else [0]
    wins = [[cls_id] + ids[s : s + budget] + [sep_id] for s in starts]
    windows_per_chapter.append(len(wins))
    cv = embed_ids(wins)
    cos = qv @ cv.T
    d = cv.mean(0)
    d /= np.linalg.norm(d)
    mean_scores[:, j] = qv @ d
    max_scores[:, j] = cos.max(1)

out = {
    "source": "sentence-transformers on the Debian FAQ (debian-faq 11.1)",
    "versions": versions(),
    "mrr": {"truncation_256": trunc, "token_128_o32_mean": mrr(mean_scores), "token_128_o32_maxp": mrr(max_scores)},
    "chapters": [
        {"number": c["number"], "title": c["title"], "body_sha256": sha256(c["body"]), "content_tokens": n, "windows": w}
        for c, n, w in zip(chapters, content_tokens, windows_per_chapter)
    ],
    "questions": questions,
}
print(json.dumps(out["mrr"], indent=1))
(FIXTURES / "debian_faq_st.json").write_text(json.dumps(out, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
