#!/usr/bin/env python3
"""Reference sentence boundaries for languages other than English, from pysbd 0.3.4.

Run by hand (needs pysbd==0.3.4 from PyPI; nothing else outside the standard library):

    python scripts/reference/make_sentence_fixtures.py DEBDIR

DEBDIR holds three Debian bookworm packages fetched with `apt-get download` (each checked
against the sha256 below):
  - debian-history 2.28: "A Brief History of Debian" in HTML, one edition per language; source
    of de, es, fr, it and ja (the <p> elements of its chapters, less those left in English).
  - gnome-user-docs 43.0-2: the GNOME desktop help in Mallard XML, one folder per language;
    source of nl, zh (zh_CN) and hi. Pages are partly translated: a paragraph identical to one
    of the English (C) edition, or without the script of its language, is left out.
  - firefox-esr-l10n-ar 153.8.0esr-1~deb12u1: the Arabic language pack of Firefox; source of ar
    (message values of its Fluent .ftl files that hold Arabic letters and at least two
    sentence marks). No stable Debian package ships Arabic prose documentation; this one is a
    security-update package whose version moves, so the texts are committed in the fixture.
    The Hindi sample is small (its translation covers a dozen paragraphs). Larger Hindi texts
    in Debian (libreoffice-help-hi) end sentences with "." where pysbd's Hindi rules split only
    at the danda, "?" and "!", so pysbd is no reference for them.

For each language, up to MAX_PARAS paragraphs (whitespace collapsed to single spaces) are
segmented by pysbd.Segmenter(language=..., clean=False) and written to
tests/fixtures/sentences/<lang>.json as {"lang", "source", "paragraphs": [{"text",
"starts"}]}, where "starts" are the UTF-8 byte offsets where the second, third, ... sentence
begins (its first non-space character). The texts are committed with the boundaries, so the
Rust test needs neither the packages nor Python.
"""
import hashlib
import html.parser
import io
import json
import os
import re
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET
import zipfile

import pysbd

MAX_PARAS = 200
DEBS = {
    "debian-history_2.28_all.deb": "ae364cdfd075bf6a08ca8f5105b44db7093e3b201c95d3b70a863b8849c6a082",
    "gnome-user-docs_43.0-2_all.deb": "0d635a840747958ca84da778b40d341f1155603851f922c9a171f5a181d6a39f",
    "firefox-esr-l10n-ar_153.8.0esr-1~deb12u1_all.deb": "c9826e96f12175d3ab39a61b0d101aaf776db522063d6e16a13409b937f4cc81",
}
OUT = os.path.join(os.path.dirname(__file__), "..", "..", "tests", "fixtures", "sentences")


def collapse(s):
    return re.sub(r"\s+", " ", s).strip()


def cjk_collapse(s):
    # A line break between two CJK characters is no space in the text (common practice for
    # wrapped CJK sources); elsewhere it is one.
    s = re.sub(r"(?<=[\u3000-\u9fff\uff00-\uffef])\s*\n\s*(?=[\u3000-\u9fff\uff00-\uffef])", "", s)
    return collapse(s)


class Paras(html.parser.HTMLParser):
    """Text of every <p> element of an HTML page."""

    def __init__(self):
        super().__init__()
        self.depth = 0
        self.buf = []
        self.out = []

    def handle_starttag(self, tag, attrs):
        if tag == "p":
            self.depth += 1
            self.buf = []

    def handle_endtag(self, tag):
        if tag == "p" and self.depth:
            self.depth -= 1
            self.out.append("".join(self.buf))

    def handle_data(self, data):
        if self.depth:
            self.buf.append(data)


def history(root, lang):
    docs = os.path.join(root, "usr/share/doc/debian-history/docs")
    out = []
    for name in sorted(os.listdir(docs)):
        if name.endswith(f".{lang}.html"):
            p = Paras()
            with open(os.path.join(docs, name), encoding="utf-8") as f:
                p.feed(f.read())
            out += p.out
    return out


MAL = "{http://projectmallard.org/1.0/}"


def mallard(root, folder):
    base = os.path.join(root, "usr/share/help", folder, "gnome-help")
    out = []
    for name in sorted(os.listdir(base)):
        if not name.endswith(".page"):
            continue
        try:
            tree = ET.parse(os.path.join(base, name))
        except ET.ParseError:
            continue
        for p in tree.iter(MAL + "p"):
            out.append("".join(p.itertext()))
    return out


def fluent(root):
    out = []
    with zipfile.ZipFile(
        os.path.join(root, "usr/lib/firefox-esr/browser/extensions/langpack-ar@firefox-esr.mozilla.org.xpi")
    ) as z:
        for name in sorted(z.namelist()):
            if not name.endswith(".ftl"):
                continue
            for line in z.read(name).decode("utf-8").splitlines():
                m = re.match(r"^[A-Za-z][\w-]* = (.+)$", line)
                if not m:
                    continue
                value = m.group(1)
                # Placeables ({ $name }, { -brand-name }) become a plain word.
                value = re.sub(r"\{[^{}]*\}", "Firefox", value)
                if re.search(r"[\u0600-\u06ff]", value) and len(re.findall(r"[.!?؟]", value)) >= 2:
                    out.append(value)
    return out


SCRIPT = {
    "zh": r"[\u4e00-\u9fff]",
    "ja": r"[\u3040-\u30ff]",
    "hi": r"[\u0900-\u097f]",
    "ar": r"[\u0600-\u06ff]",
}


def starts(text, sentences):
    """Byte offsets where each sentence after the first begins, or None when pysbd's output
    cannot be found in order in the text."""
    out = []
    cursor = None
    for sent in sentences:
        sent = sent.strip()
        if not sent:
            continue
        at = text.find(sent, cursor or 0)
        if at < 0:
            return None
        if cursor is not None:
            out.append(len(text[:at].encode("utf-8")))
        cursor = at + len(sent)
    return out


def main():
    if len(sys.argv) != 2:
        sys.exit(__doc__)
    debdir = sys.argv[1]
    tmp = tempfile.mkdtemp()
    roots = {}
    for deb, want in DEBS.items():
        path = os.path.join(debdir, deb)
        got = hashlib.sha256(open(path, "rb").read()).hexdigest()
        if got != want:
            sys.exit(f"{path}: sha256 {got}, expected {want}")
        root = os.path.join(tmp, deb.split("_")[0])
        subprocess.run(["dpkg-deb", "-x", path, root], check=True)
        roots[deb.split("_")[0]] = root

    # Paragraphs left untranslated (equal to one of the English editions) are left out.
    english = set(collapse(p) for p in mallard(roots["gnome-user-docs"], "C"))
    english |= set(collapse(p) for p in history(roots["debian-history"], "en"))
    sources = {
        "de": ("debian-history 2.28, docs/*.de.html", history(roots["debian-history"], "de")),
        "fr": ("debian-history 2.28, docs/*.fr.html", history(roots["debian-history"], "fr")),
        "es": ("debian-history 2.28, docs/*.es.html", history(roots["debian-history"], "es")),
        "it": ("debian-history 2.28, docs/*.it.html", history(roots["debian-history"], "it")),
        "ja": ("debian-history 2.28, docs/*.ja.html", history(roots["debian-history"], "ja")),
        "nl": ("gnome-user-docs 43.0-2, help/nl/gnome-help/*.page", mallard(roots["gnome-user-docs"], "nl")),
        "zh": ("gnome-user-docs 43.0-2, help/zh_CN/gnome-help/*.page", mallard(roots["gnome-user-docs"], "zh_CN")),
        "hi": ("gnome-user-docs 43.0-2, help/hi/gnome-help/*.page", mallard(roots["gnome-user-docs"], "hi")),
        "ar": ("firefox-esr-l10n-ar 153.8.0esr-1~deb12u1, langpack .ftl values", fluent(roots["firefox-esr-l10n-ar"])),
    }
    os.makedirs(OUT, exist_ok=True)
    for lang, (source, raw) in sources.items():
        seg = pysbd.Segmenter(language=lang, clean=False)
        seen = set()
        paras = []
        for r in raw:
            text = cjk_collapse(r) if lang in ("zh", "ja") else collapse(r)
            if len(text) < 20 or text in seen or text in english:
                continue
            if lang in SCRIPT and not re.search(SCRIPT[lang], text):
                continue
            seen.add(text)
            b = starts(text, seg.segment(text))
            if b is None:
                print(f"{lang}: pysbd output not found in the text, paragraph left out", file=sys.stderr)
                continue
            paras.append({"text": text, "starts": b})
            if len(paras) == MAX_PARAS:
                break
        doc = {"lang": lang, "source": source, "reference": "pysbd 0.3.4, Segmenter(language=%r, clean=False)" % lang,
               "paragraphs": paras}
        with open(os.path.join(OUT, f"{lang}.json"), "w", encoding="utf-8") as f:
            json.dump(doc, f, ensure_ascii=False, indent=0)
            f.write("\n")
        n = sum(len(p["starts"]) for p in paras)
        print(f"{lang}: {len(paras)} paragraphs, {n} inner boundaries")


if __name__ == "__main__":
    main()
