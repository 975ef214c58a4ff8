"""Tiny random encoders of each family kerf runs, WITH their weights, and what
sentence-transformers computes with them.

Sources: sentence-transformers (PyPI; 6.3.0 when made), transformers (5.24.0), tokenizers
(0.23.3), torch (CPU; 2.15.0); exact versions are recorded in the fixture.
Tokenizer training text: the Debian FAQ (Debian package debian-faq 11.1, fetched by
scripts/fetch-testdata), through the tokenizer builders of model_layouts.py (WordPiece for BERT
and DistilBERT, byte-level BPE for RoBERTa, Unigram with Metaspace for XLM-RoBERTa).

What it writes, under tests/fixtures/tiny-families/:
  * one folder per family (bert, roberta, xlm-roberta, distilbert), saved by
    sentence-transformers 6.3 (SentenceTransformer.save) from a randomly initialised encoder of
    2 layers, hidden width 32, 2 heads, feed-forward 64, vocabulary 600; model.safetensors is
    KEPT (about 0.2 MB each). Every parameter (biases and LayerNorm scales included) is drawn
    afresh with a standard deviation of 0.3 (LayerNorm scales around 1), so that token,
    position and token-type rows all change the output clearly and a wrong offset or a dropped
    row falls far below the tests' bar. The generated model card is deleted.
  * expected.json: for each family and each text, as the saved folder loads back into
    sentence-transformers: the input ids it runs (truncated at max_seq_length, 512 = the usable
    positions), the token count before truncation, the content ids and their byte offsets
    (add_special_tokens=False, offsets turned from characters into UTF-8 bytes), the final
    hidden state of each token (`encode(output_value="token_embeddings")`; for the long text
    only the rows listed in `rows`) and the sentence vector (`encode`), 6 decimals; one
    line per family.

The `tokenizers` trainers break ties between equally frequent merges in hash order, so a rerun
writes other vocabularies (and so other ids and vectors): the committed folders and
expected.json are the reference, always regenerated together.

Run by hand: /work/refvenv/bin/python tests/reference/tiny_families.py
"""
import json
import shutil
import tempfile
from pathlib import Path

import numpy as np
import sentence_transformers
import tokenizers
import torch
import transformers
from sentence_transformers import SentenceTransformer
from sentence_transformers.sentence_transformer.modules import Normalize, Pooling, Transformer

from common import FIXTURES, TESTDATA, read_utf8
from model_layouts import byte_bpe, unigram, wordpiece

OUT = FIXTURES / "tiny-families"
STD = 0.3
torch.manual_seed(17)

BERT_TINY = dict(hidden_size=32, num_hidden_layers=2, num_attention_heads=2, intermediate_size=64,
                 initializer_range=STD)
ROBERTA_STYLE = dict(max_position_embeddings=514, pad_token_id=1, bos_token_id=0, eos_token_id=2,
                     type_vocab_size=1)

FAMILIES = [
    # name, config class, config keywords, tokenizer, pooling, normalize
    ("bert", transformers.BertConfig, dict(**BERT_TINY, max_position_embeddings=512, type_vocab_size=2),
     wordpiece, "mean", True),
    ("roberta", transformers.RobertaConfig, dict(**BERT_TINY, **ROBERTA_STYLE), byte_bpe, "mean", True),
    ("xlm-roberta", transformers.XLMRobertaConfig, dict(**BERT_TINY, **ROBERTA_STYLE), unigram, "cls",
     True),
    ("distilbert", transformers.DistilBertConfig,
     dict(dim=32, n_layers=2, n_heads=2, hidden_dim=64, max_position_embeddings=512, activation="gelu",
          sinusoidal_pos_embds=False, initializer_range=STD),
     wordpiece, "mean", False),
]
MAX_SEQ = 512


def texts():
    faq = read_utf8(TESTDATA / "debian-faq" / "debian-faq.en.txt")
    start = faq.index("Debian")
    return {
        "english": "Debian is a free operating system, developed by thousands of volunteers.",
        "german": "Debian ist ein freies Betriebssystem, das von Tausenden Freiwilligen entwickelt wird.",
        "chinese": "Debian 是一个自由的操作系统，由全世界成千上万的志愿者开发。",
        # Longer than 512 tokens in every family's tokenizer: cut at the usable positions.
        "long": faq[start:start + 6000],
    }


def randomise(model):
    """Draw every parameter afresh (see the module doc)."""
    with torch.no_grad():
        for name, p in model.named_parameters():
            if "LayerNorm" in name or "layer_norm" in name:
                if name.endswith("weight"):
                    p.normal_(1.0, STD)
                else:
                    p.normal_(0.0, STD)
            else:
                p.normal_(0.0, STD)


def make(name, cfg_cls, cfg_kw, make_tok, pooling, normalize, work):
    tok = make_tok()
    cfg = cfg_cls(vocab_size=len(tok), **cfg_kw)
    model = transformers.AutoModel.from_config(cfg)
    randomise(model)
    base = work / f"{name}-base"
    model.save_pretrained(base)
    tok.save_pretrained(base)
    tr = Transformer(str(base), max_seq_length=MAX_SEQ)
    mods = [tr, Pooling(tr.get_embedding_dimension(), pooling_mode=pooling)]
    if normalize:
        mods.append(Normalize())
    st = SentenceTransformer(modules=mods, device="cpu")
    folder = OUT / name
    if folder.exists():
        shutil.rmtree(folder)
    st.save(str(folder))
    (folder / "README.md").unlink(missing_ok=True)
    return folder


def byte_offsets(text, char_offsets):
    pos = [0]
    for ch in text:
        pos.append(pos[-1] + len(ch.encode("utf-8")))
    return [[pos[a], pos[b]] for a, b in char_offsets]


def rnd(a):
    return [round(float(x), 6) for x in a]


def reference(folder, all_texts):
    st = SentenceTransformer(str(folder), device="cpu", local_files_only=True)
    st.eval()
    tok = st.tokenizer
    out = {"max_seq_length": st.max_seq_length}
    sample = tok("a")
    mask = tok.get_special_tokens_mask(sample["input_ids"], already_has_special_tokens=True)
    lead = next(i for i, m in enumerate(mask) if m == 0)
    tail = next(i for i, m in enumerate(reversed(mask)) if m == 0)
    out["specials"] = [lead, tail]
    per_text = {}
    for key, text in all_texts.items():
        feats = st.tokenize([text])
        ids = feats["input_ids"][0].tolist()
        tokens = st.encode([text], output_value="token_embeddings", convert_to_numpy=False)[0]
        tokens = tokens.float().numpy()
        assert tokens.shape[0] == len(ids), (key, tokens.shape, len(ids))
        sentence = st.encode([text], convert_to_numpy=True)[0]
        full = tok(text, truncation=False)["input_ids"]
        content = tok(text, add_special_tokens=False, return_offsets_mapping=True, truncation=False)
        rows = list(range(len(ids)))
        if len(ids) > 64:
            rows = sorted(set(list(range(8)) + list(range(8, len(ids), 61)) + list(range(len(ids) - 8, len(ids)))))
        per_text[key] = {
            "input_ids": ids,
            "tokens_untruncated": len(full),
            "content_ids": content["input_ids"],
            "content_byte_offsets": byte_offsets(text, content["offset_mapping"]),
            "rows": rows,
            "token_vectors": [rnd(tokens[r]) for r in rows],
            "sentence_vector": rnd(sentence),
        }
    out["texts"] = per_text
    return out


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    all_texts = texts()
    expected = {
        "_versions": {
            "sentence_transformers": sentence_transformers.__version__,
            "transformers": transformers.__version__,
            "tokenizers": tokenizers.__version__,
            "torch": torch.__version__,
            "numpy": np.__version__,
        },
        "_texts": all_texts,
    }
    with tempfile.TemporaryDirectory() as tmp:
        for fam in FAMILIES:
            folder = make(*fam, Path(tmp))
            expected[fam[0]] = reference(folder, all_texts)
            size = sum(p.stat().st_size for p in folder.rglob("*") if p.is_file())
            print(f"{fam[0]}: {size} bytes, specials {expected[fam[0]]['specials']}, long text "
                  f"{expected[fam[0]]['texts']['long']['tokens_untruncated']} tokens")
            assert size < 700_000, size
    lines = [f"{json.dumps(k)}: {json.dumps(v, sort_keys=True, ensure_ascii=False, separators=(',', ':'))}"
             for k, v in expected.items()]
    (OUT / "expected.json").write_text("{\n" + ",\n".join(lines) + "\n}\n")


if __name__ == "__main__":
    main()
