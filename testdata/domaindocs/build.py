#!/usr/bin/env python3
"""Builds the labelled documentation fixtures of filters/domain's real-data test.

Run from the repository root on Debian 12 with the packages installed:
    apt-get install python3-doc manpages manpages-dev debian-history zstd
    python3 testdata/domaindocs/build.py
Writes python.jsonl.zst, manpages.jsonl.zst and prose.jsonl.zst here (zstd -19): one JSON object a
line, {"id", "file", "text"}, "file" naming the source file the chunk came
from (the test splits train/test by file). See README.md.
"""
import gzip, html, html.parser, json, os, re, subprocess, sys

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
MIN_WORDS, TARGET_WORDS, MAX_WORDS = 60, 120, 300


def chunks(paras, max_chunks):
    """Consecutive paragraphs joined until TARGET_WORDS words, at most MAX_WORDS."""
    out, cur, n = [], [], 0
    for p in paras:
        w = len(p.split())
        if w == 0:
            continue
        if n + w > MAX_WORDS and cur:
            out.append(cur); cur, n = [], 0
        cur.append(p); n += w
        if n >= TARGET_WORDS:
            out.append(cur); cur, n = [], 0
    if cur:
        out.append(cur)
    res = []
    for c in out:
        text = "\n\n".join(c)
        words = text.split()
        if len(words) < MIN_WORDS:
            continue
        if len(words) > MAX_WORDS:
            text = " ".join(words[:MAX_WORDS])
        res.append(text)
        if len(res) >= max_chunks:
            break
    return res


def paragraphs(text):
    return [p.strip("\n") for p in re.split(r"\n\s*\n", text) if p.strip()]


ROLE = re.compile(r":[\w:+-]+:`([^`<]*?)(?:\s*<[^>]*>)?`")
LINK = re.compile(r"`([^`<]+?)\s*<[^>]*>`_+")


def clean_rst(src):
    lines, out, skip = src.split("\n"), [], False
    for i, line in enumerate(lines):
        if skip:
            if line.strip() == "" or line.startswith(" "):
                continue
            skip = False
        if line.startswith(".. "):
            skip = True
            continue
        if re.fullmatch(r"([=*\-~^\"#+'`.])\1{2,}\s*", line):
            continue
        line = ROLE.sub(r"\1", line)
        line = LINK.sub(r"\1", line)
        line = line.replace("``", "").replace("**", "")
        line = re.sub(r"\|(\w+)\|", r"\1", line)
        line = line.replace("::", ":")
        out.append(line.rstrip())
    return "\n".join(out)


def python_docs():
    base = "/usr/share/doc/python3.11/html/_sources"
    files = []
    for d in ["reference", "tutorial", "library", "howto", "faq"]:
        for name in sorted(os.listdir(os.path.join(base, d))):
            if name.endswith(".rst.txt"):
                files.append(os.path.join(d, name))
    docs = []
    for rel in files:
        with open(os.path.join(base, rel), encoding="utf-8") as f:
            text = clean_rst(f.read())
        for i, c in enumerate(chunks(paragraphs(text), 2)):
            docs.append({"file": "python3.11-doc:" + rel, "text": c, "n": i})
    return docs


def man_docs():
    docs = []
    for sec in ["2", "3", "5", "7"]:
        d = "/usr/share/man/man" + sec
        pkg_files = subprocess.run(["dpkg", "-L", "manpages", "manpages-dev"], capture_output=True, text=True).stdout.split()
        names = sorted(os.path.basename(p) for p in pkg_files if p.startswith(d + "/") and p.endswith(".gz"))
        names = names[::3] if sec == "3" else names  # man3 is large: every third page
        for name in names:
            path = os.path.join(d, name)
            if os.path.islink(path):
                continue
            r = subprocess.run(["man", "-P", "cat", "-l", path], capture_output=True, text=True, env=dict(os.environ, MANWIDTH="80", LC_ALL="C.UTF-8"))
            text = subprocess.run(["col", "-bx"], input=r.stdout, capture_output=True, text=True).stdout
            lines = text.split("\n")[1:-2]  # drop header and footer lines
            body = "\n".join(l.strip() for l in lines)
            # start at DESCRIPTION when the page has one
            m = re.search(r"^DESCRIPTION$", body, re.M)
            if m:
                body = body[m.end():]
            for i, c in enumerate(chunks(paragraphs(body), 1)):
                docs.append({"file": "manpages:man" + sec + "/" + name[:-3], "text": c, "n": i})
    return docs


class TextOf(html.parser.HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.paras, self.cur, self.skip = [], [], 0
    def handle_starttag(self, tag, attrs):
        if tag in ("script", "style", "head"):
            self.skip += 1
        if tag in ("p", "li", "h1", "h2", "h3", "pre", "dt", "dd", "br", "div"):
            self.flush()
    def handle_endtag(self, tag):
        if tag in ("script", "style", "head"):
            self.skip -= 1
        if tag in ("p", "li", "h1", "h2", "h3", "pre", "dt", "dd", "div"):
            self.flush()
    def handle_data(self, data):
        if not self.skip:
            self.cur.append(data)
    def flush(self):
        t = " ".join("".join(self.cur).split())
        if t:
            self.paras.append(t)
        self.cur = []


def prose_docs():
    docs = []
    with open(os.path.join(ROOT, "testdata/udhr/en.txt"), encoding="utf-8") as f:
        paras = [l.strip() for l in f if l.strip()]
    for i, c in enumerate(chunks(paras, 1000)):
        docs.append({"file": "udhr:eng", "text": c, "n": i})
    p = TextOf()
    with open("/usr/share/doc/debian-history/docs/detailed.en.html", encoding="utf-8") as f:
        p.feed(f.read())
    p.flush()
    for i, c in enumerate(chunks(p.paras, 1000)):
        docs.append({"file": "debian-history:detailed.en.html#%d" % (i // 5), "text": c, "n": i})
    for name in ["debian-manifesto.gz", "social-contract.txt.gz", "constitution.txt.gz"]:
        with gzip.open("/usr/share/doc/debian-history/" + name, "rt", encoding="utf-8") as f:
            text = f.read()
        paras = [" ".join(p.split()) for p in paragraphs(text)]
        for i, c in enumerate(chunks(paras, 1000)):
            docs.append({"file": "debian-history:" + name[:-3] + "#%d" % (i // 5), "text": c, "n": i})
    return docs


def write(name, docs):
    path = os.path.join(HERE, name)
    with open(path, "w", encoding="utf-8") as f:
        for d in docs:
            rec = {"id": "%s/%d" % (d["file"], d["n"]), "file": d["file"], "text": d["text"]}
            f.write(json.dumps(rec, ensure_ascii=False) + "\n")
    subprocess.run(["zstd", "-19", "-q", "-f", "--rm", path, "-o", path + ".zst"], check=True)
    print(name + ".zst", len(docs), "docs", sum(len(d["text"]) for d in docs), "bytes", file=sys.stderr)


write("python.jsonl", python_docs())
write("manpages.jsonl", man_docs())
write("prose.jsonl", prose_docs())
