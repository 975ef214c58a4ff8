"""Shared helpers for the reference scripts (run by hand in a throw-away venv; see README.md)."""
import hashlib
import os
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
KERF_HOME = Path(os.environ.get("KERF_HOME") or Path.home() / ".cache" / "kerf")
MODEL_DIR = KERF_HOME / "models" / "all-MiniLM-L6-v2"
TESTDATA = KERF_HOME / "testdata"
FIXTURES = REPO / "tests" / "fixtures"
os.environ.setdefault("HF_HUB_OFFLINE", "1")


def sha256(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def lee_docs():
    """The 50 Lee documents, one per line, Latin-1 (gensim 4.4.0 test data)."""
    raw = (TESTDATA / "lee" / "lee.cor").read_bytes().decode("latin-1")
    docs = [l for l in raw.split("\n") if l.strip()]
    assert len(docs) == 50, len(docs)
    return docs


def lee_human():
    rows = [[float(x) for x in l.split()] for l in (TESTDATA / "lee" / "similarities0-1.txt").read_text().splitlines() if l.strip()]
    assert len(rows) == 50 and all(len(r) == 50 for r in rows)
    return rows


def versions():
    import importlib.metadata as md
    out = {}
    for p in ("torch", "transformers", "sentence-transformers", "numpy", "pytrec-eval-terrier"):
        try:
            out[p] = md.version(p)
        except md.PackageNotFoundError:
            pass
    return out
