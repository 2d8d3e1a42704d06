#!/usr/bin/env python3
"""Build testdata/closepairs: Indonesian, Malay, Bosnian, Croatian and
Serbian (Latin script) texts from the gettext catalogues of Debian bookworm
packages that neither the held-out set testdata/langeval nor the close-pair
word counts (filters/langid/pairdata) read. A second check of the close-pair
decisions.

    mkdir /tmp/cp-debs && cd /tmp/cp-debs && apt-get download PACKAGES...
    python3 build.py --debs /tmp/cp-debs     # texts.jsonl.gz, SOURCES.tsv

PACKAGES are those of SOURCES.tsv (the packages that had catalogues and were
read). Each catalogue is cut into long texts (>= 50 words) exactly as
testdata/langeval/build.py does; one JSON line per text: id "LANG/PACKAGE/N"
(LANG the label: the catalogue's locale, sr for sr@latin) and text. Texts of a
Latin-script catalogue with Cyrillic letters are dropped. Deterministic.
"""
import argparse, gzip, importlib.util, json, os, subprocess, tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.normpath(os.path.join(HERE, '..', '..'))

def load(name, path):
    spec = importlib.util.spec_from_file_location(name, path)
    m = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(m)
    return m

langeval = load('langeval', os.path.join(ROOT, 'testdata', 'langeval', 'build.py'))
pairdata = load('pairdata', os.path.join(ROOT, 'filters', 'langid', 'pairdata', 'build.py'))

def main():
    ap = argparse.ArgumentParser()
    ap.add_argument('--debs', required=True)
    ap.add_argument('--out', default=HERE)
    a = ap.parse_args()
    skip = pairdata.held_out_domains()
    with open(os.path.join(ROOT, 'filters', 'langid', 'pairdata', 'SOURCES.tsv'), encoding='utf-8') as f:
        trained = {line.split('\t')[0] for line in list(f)[1:]}
    rows, sources = [], []
    for deb in sorted(f for f in os.listdir(a.debs) if f.endswith('.deb')):
        path = os.path.join(a.debs, deb)
        pkg, ver = pairdata.deb_info(path)
        if pkg in trained:
            continue
        with tempfile.TemporaryDirectory() as tmp:
            subprocess.run(['dpkg-deb', '-x', path, tmp], check=True)
            used = []
            for loc, lang in (('bs', 'bs'), ('hr', 'hr'), ('id', 'id'), ('ms', 'ms'), ('sr@latin', 'sr')):
                for name, units in pairdata.locale_catalogues(tmp, loc, skip):
                    units = [u for u in units if langeval.cyr(u) < 0.05]
                    longs, _ = langeval.long_and_short(units, lang)
                    for i, t in enumerate(longs):
                        rows.append({'id': '%s/%s/%d' % (lang, pkg, i), 'text': t})
                    if longs:
                        used.append('%s:%s' % (loc, name))
            if used:
                sources.append((pkg, ver, ' '.join(used), pairdata.licence(tmp, pkg)))
    with open(os.path.join(a.out, 'texts.jsonl.gz'), 'wb') as raw:
        with gzip.GzipFile(fileobj=raw, mode='wb', mtime=0, filename='') as f:
            for r in rows:
                f.write((json.dumps(r, ensure_ascii=False) + '\n').encode())
    with open(os.path.join(a.out, 'SOURCES.tsv'), 'w', encoding='utf-8') as f:
        f.write('debian_package\tversion\tcatalogues\tlicence\n')
        for s in sources:
            f.write('\t'.join(s) + '\n')

if __name__ == '__main__':
    main()
