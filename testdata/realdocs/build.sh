#!/bin/sh
# Builds testdata/realdocs from text that Debian packages installed on the
# build machine ship, rendered and compressed by independent tools:
#   man/pages.jsonl.zst  manual pages (coreutils, grep, sed, tar, gzip,
#                        findutils, wget, curl) rendered to text by groff,
#                        one JSON record per page (Python's json module),
#                        compressed by the zstd command-line tool
#   po/*.po.gz           iso-codes country-name catalogues (.mo) turned back
#                        into .po text by msgunfmt (gettext), one per language
#                        in many scripts, compressed by gzip
#   html/*.html          libffi's reference manual pages (HTML by texinfo),
#                        copied as they are
#   evals/manual-qa.jsonl two eval items quoting manual pages (so the
#                        decontaminate stage has real overlaps to find)
# Licences of each package are copied to LICENSES/; SOURCE lists the package
# versions. Run from this directory: sh build.sh
set -eu
rm -rf man po html evals LICENSES
mkdir -p man po html evals LICENSES
: > SOURCE

pkgver() { dpkg-query -W -f='${Package} ${Version}\n' "$1" >> SOURCE; cp "/usr/share/doc/$1/copyright" "LICENSES/$1.copyright"; }

for p in coreutils grep sed tar gzip findutils wget curl iso-codes libffi-dev; do pkgver "$p"; done
echo "groff $(groff --version | head -1)" >> SOURCE
echo "gettext $(msgunfmt --version | head -1)" >> SOURCE

# Manual pages: groff -Tutf8 with SGR and overstrike off (-P-cbou).
for page in ls grep sed tar gzip find wget curl xargs sort date cp; do
	zcat "/usr/share/man/man1/$page.1.gz" | MANWIDTH=80 groff -man -Tutf8 -P-cbou 2>/dev/null > "man/$page.txt" || true
done
python3 - <<'PY'
import json, os
with open("man/pages.jsonl", "w", encoding="utf-8") as out:
    for name in sorted(os.listdir("man")):
        if name.endswith(".txt"):
            text = open(os.path.join("man", name), encoding="utf-8", errors="surrogateescape").read()
            out.write(json.dumps({"id": "man/" + name[:-4] + ".1", "text": text}, ensure_ascii=False) + "\n")
PY
rm man/*.txt
zstd -q -19 --rm man/pages.jsonl

# Country names in many scripts.
for lang in ar el he hi ja ka ko ru th uk zh_CN am fr de vi; do
	mo="/usr/share/locale/$lang/LC_MESSAGES/iso_3166-1.mo"
	[ -f "$mo" ] || continue
	msgunfmt "$mo" | gzip -9n > "po/iso_3166-1.$lang.po.gz"
done

for f in Introduction Using-libffi The-Basics Simple-Example Types Primitive-Types Structures Size-and-Alignment Arrays-Unions-Enums Type-Example Complex Complex-Type-Example Multiple-ABIs The-Closure-API Closure-Example Thread-Safety Memory-Usage; do
	cp "/usr/share/doc/libffi8/html/$f.html" html/
done

# Eval items: words of two manual pages (two the default spec keeps)' DESCRIPTION sections, as a test
# set quoting documentation would hold them.
zstd -dc man/pages.jsonl.zst | python3 -c '
import json, sys
items = []
for line in sys.stdin:
    rec = json.loads(line)
    if rec["id"] not in ("man/gzip.1", "man/ls.1"):
        continue
    text = rec["text"]
    words = text[text.index("DESCRIPTION") + len("DESCRIPTION"):].split()[:40]
    items.append({"id": rec["id"], "question": " ".join(words[:28]), "answer": " ".join(words[28:])})
for it in items:
    print(json.dumps(it, ensure_ascii=False))
' > evals/manual-qa.jsonl
