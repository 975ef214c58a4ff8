"""Tiny model folders in the layouts sentence-transformers writes, and what it reads from them.

Sources: sentence-transformers (PyPI; 6.3.0 when made), transformers (5.24.0), tokenizers
(0.23.3), torch (CPU; 2.15.0); exact versions are recorded in the fixture.
Tokenizer training text: the Debian FAQ (Debian package debian-faq 11.1, fetched by
scripts/fetch-testdata to testdata/debian-faq/debian-faq.en.txt), the open text the other
reference checks use.

What it writes, under tests/fixtures/model-layouts/:
  * one folder per case, saved by sentence-transformers 6.3 itself (SentenceTransformer.save)
    from a tiny randomly initialised encoder (2 layers, 32 dimensions) and a tokenizer trained
    here with the `tokenizers` library: WordPiece (BERT style), byte-level BPE (RoBERTa style,
    514 positions, pad_token_id 1), Unigram with Metaspace (XLM-R style).
  * `st2-layout`: the older layout the default model (all-MiniLM-L6-v2, saved by
    sentence-transformers 2.0.0) has, made by HAND-ADJUSTING a 6.3 save: 1_Pooling/config.json
    rewritten to one boolean per mode with `word_embedding_dimension`, the configured length
    moved into sentence_bert_config.json `max_seq_length` and tokenizer_config.json's
    `model_max_length` set to 512 (as the default model's is), config_sentence_transformers.json
    with only a `__version__` block. No older sentence-transformers was installed.
  * expected.json: what sentence-transformers 6.3 reports when it loads each saved folder
    (max_seq_length, get_sentence_embedding_dimension(), the Pooling module's pooling_mode,
    prompts, default_prompt_name, whether a Normalize module follows), plus the config facts.

Weights are not kept (kerf reads conventions from the JSON files; tests that run an encoder use
the default model): model.safetensors and the generated model card are deleted after loading.

Run by hand: /work/refvenv/bin/python tests/reference/model_layouts.py
"""
import json
import shutil
import tempfile
from pathlib import Path

import sentence_transformers
import tokenizers
import torch
import transformers
from sentence_transformers import SentenceTransformer
from sentence_transformers.sentence_transformer.modules import Normalize, Pooling, Transformer
from tokenizers import Tokenizer, decoders, models, normalizers, pre_tokenizers, processors, trainers

from common import FIXTURES, TESTDATA, read_utf8

OUT = FIXTURES / "model-layouts"
VOCAB = 600
torch.manual_seed(0)


def corpus():
    text = read_utf8(TESTDATA / "debian-faq" / "debian-faq.en.txt")
    return [l for l in text.split("\n") if l.strip()]


def wordpiece():
    tok = Tokenizer(models.WordPiece(unk_token="[UNK]"))
    tok.normalizer = normalizers.BertNormalizer(lowercase=True)
    tok.pre_tokenizer = pre_tokenizers.BertPreTokenizer()
    tok.decoder = decoders.WordPiece()
    specials = ["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]"]
    tok.train_from_iterator(corpus(), trainers.WordPieceTrainer(vocab_size=VOCAB, special_tokens=specials))
    tok.post_processor = processors.TemplateProcessing(
        single="[CLS] $A [SEP]",
        pair="[CLS] $A [SEP] $B:1 [SEP]:1",
        special_tokens=[("[CLS]", tok.token_to_id("[CLS]")), ("[SEP]", tok.token_to_id("[SEP]"))],
    )
    fast = transformers.PreTrainedTokenizerFast(
        tokenizer_object=tok, unk_token="[UNK]", pad_token="[PAD]", cls_token="[CLS]",
        sep_token="[SEP]", mask_token="[MASK]",
    )
    return fast


def byte_bpe():
    tok = Tokenizer(models.BPE())
    tok.pre_tokenizer = pre_tokenizers.ByteLevel(add_prefix_space=False)
    tok.decoder = decoders.ByteLevel()
    specials = ["<s>", "<pad>", "</s>", "<unk>", "<mask>"]
    tok.train_from_iterator(
        corpus(),
        trainers.BpeTrainer(vocab_size=VOCAB, special_tokens=specials,
                            initial_alphabet=pre_tokenizers.ByteLevel.alphabet()),
    )
    tok.post_processor = processors.RobertaProcessing(("</s>", 2), ("<s>", 0), add_prefix_space=False)
    return transformers.PreTrainedTokenizerFast(
        tokenizer_object=tok, bos_token="<s>", eos_token="</s>", unk_token="<unk>",
        pad_token="<pad>", cls_token="<s>", sep_token="</s>", mask_token="<mask>",
    )


def unigram():
    tok = Tokenizer(models.Unigram())
    tok.normalizer = normalizers.NFKC()
    tok.pre_tokenizer = pre_tokenizers.Metaspace()
    tok.decoder = decoders.Metaspace()
    specials = ["<s>", "<pad>", "</s>", "<unk>", "<mask>"]
    tok.train_from_iterator(
        corpus(), trainers.UnigramTrainer(vocab_size=VOCAB, special_tokens=specials, unk_token="<unk>")
    )
    tok.post_processor = processors.TemplateProcessing(
        single="<s> $A </s>", pair="<s> $A </s> </s> $B </s>",
        special_tokens=[("<s>", 0), ("</s>", 2)],
    )
    return transformers.PreTrainedTokenizerFast(
        tokenizer_object=tok, bos_token="<s>", eos_token="</s>", unk_token="<unk>",
        pad_token="<pad>", cls_token="<s>", sep_token="</s>", mask_token="<mask>",
    )


TINY = dict(hidden_size=32, num_hidden_layers=2, num_attention_heads=2, intermediate_size=64)

CASES = [
    # name, config class, config overrides, tokenizer, max_seq_length, pooling, normalize, prompts
    ("bert-st6", transformers.BertConfig, dict(max_position_embeddings=512), wordpiece, 200,
     "mean", True, dict(prompts={"query": "query: ", "passage": "passage: "}, default_prompt_name="query")),
    ("roberta-st6", transformers.RobertaConfig,
     dict(max_position_embeddings=514, pad_token_id=1, bos_token_id=0, eos_token_id=2, type_vocab_size=1),
     byte_bpe, None, "cls", False, {}),
    ("xlmr-st6", transformers.XLMRobertaConfig,
     dict(max_position_embeddings=514, pad_token_id=1, bos_token_id=0, eos_token_id=2, type_vocab_size=1),
     unigram, 256, "mean_sqrt_len_tokens", True,
     dict(prompts={"query": "query: ", "document": "document: "}, default_prompt_name=None)),
    ("mpnet-st6", transformers.MPNetConfig, dict(max_position_embeddings=514), unigram, 384,
     "max", True, {}),
    ("bert-lasttoken", transformers.BertConfig, dict(max_position_embeddings=512), wordpiece, 128,
     "lasttoken", False, {}),
    ("bert-weightedmean", transformers.BertConfig, dict(max_position_embeddings=512), wordpiece, 128,
     "weightedmean", True, {}),
    ("electra-st6", transformers.ElectraConfig,
     dict(max_position_embeddings=512, embedding_size=32), wordpiece, 128, "mean", True, {}),
]

KEEP = {"config.json", "tokenizer.json", "tokenizer_config.json", "modules.json",
        "sentence_bert_config.json", "config_sentence_transformers.json", "special_tokens_map.json"}


def make(name, cfg_cls, overrides, make_tok, max_seq, pooling, normalize, prompt_kw, work):
    tok = make_tok()
    cfg = cfg_cls(vocab_size=len(tok), **TINY, **overrides)
    base = work / f"{name}-base"
    transformers.AutoModel.from_config(cfg).save_pretrained(base)
    tok.save_pretrained(base)
    t_kw = {} if max_seq is None else {"max_seq_length": max_seq}
    tr = Transformer(str(base), **t_kw)
    mods = [tr, Pooling(tr.get_embedding_dimension(), pooling_mode=pooling)]
    if normalize:
        mods.append(Normalize())
    st = SentenceTransformer(modules=mods, device="cpu", **prompt_kw)
    folder = OUT / name
    if folder.exists():
        shutil.rmtree(folder)
    st.save(str(folder))
    return folder


def prune(folder: Path):
    for p in folder.iterdir():
        if p.is_dir():
            if p.name != "1_Pooling":
                shutil.rmtree(p)
        elif p.name not in KEEP:
            p.unlink()


def reported(folder: Path):
    """What sentence-transformers 6.3 reads back from a saved folder."""
    st = SentenceTransformer(str(folder), device="cpu", local_files_only=True)
    pool = next(m for m in st if isinstance(m, Pooling))
    cfg = json.loads((folder / "config.json").read_text())
    mode = pool.pooling_mode
    return {
        "model_type": cfg["model_type"],
        "max_position_embeddings": cfg["max_position_embeddings"],
        "pad_token_id": cfg.get("pad_token_id"),
        "max_seq_length": st.max_seq_length,
        "dimension": st.get_sentence_embedding_dimension(),
        "pooling_mode": mode if isinstance(mode, str) else list(mode),
        "normalize": any(isinstance(m, Normalize) for m in st),
        "prompts": {k: v for k, v in st.prompts.items() if v},
        "default_prompt_name": st.default_prompt_name,
        "specials_per_input": len(st.tokenizer("")["input_ids"]),
    }


def to_st2_layout(src: Path, dst: Path, max_seq: int):
    """Hand-adjust a 6.3 save to the older layout of the default model (see the module doc)."""
    if dst.exists():
        shutil.rmtree(dst)
    shutil.copytree(src, dst)
    pool = json.loads((dst / "1_Pooling" / "config.json").read_text())
    modes = pool["pooling_mode"]
    modes = [modes] if isinstance(modes, str) else modes
    old = {"word_embedding_dimension": pool["embedding_dimension"]}
    for key, mode in [("pooling_mode_cls_token", "cls"), ("pooling_mode_mean_tokens", "mean"),
                      ("pooling_mode_max_tokens", "max"),
                      ("pooling_mode_mean_sqrt_len_tokens", "mean_sqrt_len_tokens")]:
        old[key] = mode in modes
    (dst / "1_Pooling" / "config.json").write_text(json.dumps(old, indent=2))
    (dst / "sentence_bert_config.json").write_text(
        json.dumps({"max_seq_length": max_seq, "do_lower_case": False}, indent=2))
    tc = json.loads((dst / "tokenizer_config.json").read_text())
    tc["model_max_length"] = 512
    (dst / "tokenizer_config.json").write_text(json.dumps(tc, indent=2))
    (dst / "config_sentence_transformers.json").write_text(json.dumps(
        {"__version__": {"sentence_transformers": "2.0.0", "transformers": "4.6.1", "pytorch": "1.8.1"}},
        indent=2))


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    expected = {
        "_versions": {
            "sentence_transformers": sentence_transformers.__version__,
            "transformers": transformers.__version__,
            "tokenizers": tokenizers.__version__,
            "torch": torch.__version__,
        },
    }
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        for case in CASES:
            folder = make(*case, work)
            # mpnet-st6 keeps the Unigram tokenizer: the reading side is what is checked.
            if case[0] == "bert-st6":
                old = OUT / "st2-layout"
                to_st2_layout(folder, old, 256)
                expected["st2-layout"] = reported(old)
                prune(old)
            expected[case[0]] = reported(folder)
            prune(folder)
    (OUT / "expected.json").write_text(json.dumps(expected, indent=2, sort_keys=True) + "\n")
    print(json.dumps(expected, indent=2, sort_keys=True))


if __name__ == "__main__":
    main()
