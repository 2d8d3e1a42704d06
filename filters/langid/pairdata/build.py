#!/usr/bin/env python3
"""Build the word counts of the close-pair model (filters/langid/closepairs.go).

The counts are learnt from gettext catalogues (.mo) that Debian bookworm
packages ship for Bosnian, Croatian, Serbian (both scripts) and Indonesian
and Malay. None of these catalogues is part of the held-out evaluation set
testdata/langeval: any catalogue domain named in testdata/langeval/SOURCES.tsv
is skipped, and the packages below are not installed on the build machine.

    sh fetch.sh DEBS              # apt-get download of PACKAGES into DEBS
    python3 build.py --debs DEBS  # writes words.tsv.gz and SOURCES.tsv

--validate also writes validation.tsv: the catalogues of the VALIDATION
packages are left out of the counts and cut into long texts (>= 50 words) for
choosing how the model is used, without touching the held-out set.

Messages are read and cleaned exactly as testdata/langeval/build.py reads its
catalogues (its functions are imported). Serbian Cyrillic messages are
transliterated to Latin letter for letter (the two alphabets map one to one).
Words: runs of letters with inner hyphens, lower-cased, as closeCounts in
closepairs.go reads them. Each catalogue adds at most MAX_WORDS words, so that
one large catalogue does not stand for its language. Words seen fewer than
MIN_COUNT times in a group are dropped. Deterministic: same .deb files, same
output.
"""
import argparse, collections, gzip, importlib.util, os, re, subprocess, sys, tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.normpath(os.path.join(HERE, '..', '..', '..'))
spec = importlib.util.spec_from_file_location('langeval', os.path.join(ROOT, 'testdata', 'langeval', 'build.py'))
langeval = importlib.util.module_from_spec(spec)
spec.loader.exec_module(langeval)

# Locale directory -> (group, label).
LOCALES = {
    'bs': ('sc', 'bs'), 'hr': ('sc', 'hr'), 'sr@latin': ('sc', 'sr'), 'sr': ('sc', 'sr'),
    'id': ('ma', 'id'), 'ms': ('ma', 'ms'),
}
MAX_WORDS = 40000

# The packages --validate leaves out: every 5th of the 55 packages first
# downloaded (sorted by name), fixed here so that the split does not depend
# on which other .deb files lie beside them.
VALIDATION = {'baobab', 'evolution-common', 'gimp-data', 'gnome-terminal-data', 'inkscape',
              'network-manager-gnome', 'ristretto', 'totem-common', 'xfwm4'}
MIN_COUNT = 2

CYR = dict(zip('абвгдђежзијклљмнњопрстћуфхцчџш',
               ['a', 'b', 'v', 'g', 'd', 'đ', 'e', 'ž', 'z', 'i', 'j', 'k', 'l', 'lj', 'm', 'n', 'nj', 'o',
                'p', 'r', 's', 't', 'ć', 'u', 'f', 'h', 'c', 'č', 'dž', 'š']))

def to_latin(s):
    return ''.join(CYR.get(c, c) for c in s.lower())

WORD = re.compile(r'[^\W\d_](?:[^\W\d_]|-(?=[^\W\d_]))*')

def words(text):
    return [w.lower() for w in WORD.findall(text)]

def held_out_domains():
    with open(os.path.join(ROOT, 'testdata', 'langeval', 'SOURCES.tsv'), encoding='utf-8') as f:
        next(f)
        return {line.split('\t')[0] for line in f}

def deb_info(path):
    out = subprocess.run(['dpkg-deb', '-f', path, 'Package', 'Version'], capture_output=True, text=True, check=True).stdout
    f = dict(l.split(': ', 1) for l in out.splitlines() if ': ' in l)
    return f['Package'], f['Version']

def licence(root, pkg):
    """The first License: field of the package's copyright file, else the
    first licence it names in prose; a doc directory that is a link names
    the package whose copyright file applies."""
    doc = os.path.join(root, 'usr/share/doc', pkg)
    if os.path.islink(doc):
        return 'see the copyright file of ' + os.path.basename(os.readlink(doc))
    try:
        txt = open(os.path.join(doc, 'copyright'), encoding='utf-8', errors='replace').read()
    except OSError:
        return '?'
    m = re.search(r'^License:\s*(\S.*)$', txt, re.M) or re.search(
        r'(GNU (?:Lesser |Library )?General Public License[^.;\n]*|L?GPL[-\w.+]*)', txt)
    return one_line(m.group(1)) if m else '?'

def one_line(s):
    return re.sub(r'\s+', ' ', s).strip()

def locale_catalogues(root, loc, skip):
    """(name, translated messages) of each catalogue an unpacked package has
    for locale loc, in name order, leaving out the domains in skip and the
    catalogues of names (langeval.SKIP_DOMAIN)."""
    for dirpath, _, files in sorted(os.walk(root)):
        if not dirpath.endswith('/locale/%s/LC_MESSAGES' % loc):
            continue
        for name in sorted(files):
            if name.endswith('.mo') and name not in skip and not langeval.SKIP_DOMAIN.match(name):
                yield name, [u[1] for u in langeval.catalogue_units(os.path.join(dirpath, name))]

def main():
    ap = argparse.ArgumentParser()
    ap.add_argument('--debs', required=True)
    ap.add_argument('--out', default=HERE)
    ap.add_argument('--validate', action='store_true',
                    help='leave VALIDATION out of the counts and write their texts to validation.tsv')
    ap.add_argument('--groups', default='ma,sc', help='ma (Indonesian/Malay), sc (Bosnian/Croatian/Serbian) or both')
    a = ap.parse_args()
    groups = set(a.groups.split(','))
    skip = held_out_domains()
    counts = {g: collections.Counter() for g in groups}  # (label, word) -> n
    valid = []
    sources = []
    debs = sorted(f for f in os.listdir(a.debs) if f.endswith('.deb'))
    for i, deb in enumerate(debs):
        path = os.path.join(a.debs, deb)
        pkg, ver = deb_info(path)
        held_back = a.validate and pkg in VALIDATION
        with tempfile.TemporaryDirectory() as tmp:
            subprocess.run(['dpkg-deb', '-x', path, tmp], check=True)
            used = collections.Counter()
            for loc in sorted(LOCALES):
                group, label = LOCALES[loc]
                if group not in groups:
                    continue
                for name, units in locale_catalogues(tmp, loc, skip):
                    cyr = loc == 'sr'
                    units = [u for u in units if (langeval.cyr(u) > 0.8) == cyr and (cyr or langeval.cyr(u) < 0.05)]
                    if cyr:
                        units = [to_latin(u) for u in units]
                    if not units:
                        continue
                    used[loc] += 1
                    if held_back:
                        longs, _ = langeval.long_and_short(units, label)
                        valid += [(label, pkg + '/' + loc + '/' + name, t) for t in longs]
                        continue
                    n = 0
                    for u in units:
                        for w in words(u):
                            if n >= MAX_WORDS:
                                break
                            counts[group][(label, w)] += 1
                            n += 1
            if used:
                sources.append((pkg, ver, ' '.join('%s:%d' % kv for kv in sorted(used.items())),
                licence(tmp, pkg), 'validation' if held_back else 'counts'))
    totals = collections.Counter()
    rows = []
    for group in sorted(counts):
        per_word = collections.Counter()
        for (label, w), n in counts[group].items():
            per_word[w] += n
            totals[(group, label)] += n
        for (label, w), n in sorted(counts[group].items()):
            if per_word[w] >= MIN_COUNT:
                rows.append('%s\t%s\t%s\t%d\n' % (group, label, w, n))
    with gzip.GzipFile(os.path.join(a.out, 'words.tsv.gz'), 'wb', mtime=0) as f:
        f.write('# group\tlabel\tword\tcount (built by build.py; see README.md)\n'.encode())
        for (group, label), n in sorted(totals.items()):
            f.write(('%s\t%s\t\t%d\n' % (group, label, n)).encode())  # total words read, empty word
        for r in rows:
            f.write(r.encode())
    with open(os.path.join(a.out, 'SOURCES.tsv'), 'w', encoding='utf-8') as f:
        f.write('debian_package\tversion\tcatalogues_used\tlicence\tused_for\n')
        for s in sources:
            f.write('\t'.join(s) + '\n')
    if a.validate:
        with open(os.path.join(a.out, 'validation.tsv'), 'w', encoding='utf-8') as f:
            for label, origin, t in valid:
                f.write('%s\t%s\t%s\n' % (label, origin, t))
    print('words: %d rows; totals %s; validation texts %d' % (len(rows), dict(totals), len(valid)), file=sys.stderr)

if __name__ == '__main__':
    main()
