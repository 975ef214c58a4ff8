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


def read_utf8(path) -> str:
    """A file's text exactly as its bytes say: UTF-8, no newline translation (Path.read_text
    would turn CRLF into LF, and the Rust side reads the raw bytes)."""
    return Path(path).read_bytes().decode("utf-8")


def lee_docs():
    """The 50 Lee documents (gensim 4.4.0 test data): lee.cor decoded as Latin-1, split on "\n",
    lines that are empty or all whitespace dropped; each document is its line as is."""
    raw = (TESTDATA / "lee" / "lee.cor").read_bytes().decode("latin-1")
    docs = [l for l in raw.split("\n") if l.strip()]
    assert len(docs) == 50, len(docs)
    return docs


def lee_human():
    text = (TESTDATA / "lee" / "similarities0-1.txt").read_bytes().decode("ascii")
    rows = [[float(x) for x in l.split()] for l in text.splitlines() if l.strip()]
    assert len(rows) == 50 and all(len(r) == 50 for r in rows)
    return rows


def versions():
    import importlib.metadata as md
    import platform
    out = {"python": platform.python_version()}
    for p in ("torch", "transformers", "tokenizers", "sentence-transformers", "numpy", "pytrec-eval-terrier"):
        try:
            out[p] = md.version(p)
        except md.PackageNotFoundError:
            pass
    return out
