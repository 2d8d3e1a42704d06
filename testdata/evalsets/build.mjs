// Builds the multiple-choice eval set of this directory from the npm
// command documentation shipped in the npm package (docs/content/commands,
// Artistic License 2.0, see LICENSE), and writes it with DuckDB
// (npm package @duckdb/node-api) as Parquet, JSON lines, CSV and TSV.
//
//   npm install @duckdb/node-api     (in any scratch directory)
//   NODE_PATH=<scratch>/node_modules node build.mjs [/usr/lib/node_modules/npm]
//
// Each item: id, question (the first sentence of a command's Description,
// verbatim), choices (four command names), label (index of the right one),
// letter (the same as A-D), meta {title, summary, section} (summary is the
// page's one-line description). Items are in file-name order; the right
// answer rotates through the four positions.
import fs from 'node:fs';
import path from 'node:path';
import { createRequire } from 'node:module';

const require = createRequire(import.meta.url);
const { DuckDBInstance } = require('@duckdb/node-api');

const npmDir = process.argv[2] || '/usr/lib/node_modules/npm';
const cmdDir = path.join(npmDir, 'docs/content/commands');
const version = JSON.parse(fs.readFileSync(path.join(npmDir, 'package.json'), 'utf8')).version;
const out = path.dirname(new URL(import.meta.url).pathname);

const pages = [];
for (const f of fs.readdirSync(cmdDir).sort()) {
  if (!f.endsWith('.md')) continue;
  const src = fs.readFileSync(path.join(cmdDir, f), 'utf8');
  const front = /^---\n([\s\S]*?)\n---/.exec(src);
  if (!front) continue;
  const field = (k) => (new RegExp('^' + k + ': *(.*)$', 'm').exec(front[1]) || [])[1];
  const desc = /### Description\n\n([^\n]+)/.exec(src);
  if (!desc) continue;
  // First sentence of the first Description line, without Markdown code marks.
  let q = desc[1].replace(/`/g, '');
  const stop = q.search(/[.!?](\s|$)/);
  if (stop > 0) q = q.slice(0, stop + 1);
  pages.push({ title: field('title'), summary: field('description'), section: Number(field('section')), question: q });
}
const items = pages.slice(0, 48).map((p, i) => {
  const n = pages.length;
  const wrong = [1, 2, 3].map((k) => pages[(i + 7 * k) % n].title);
  const label = i % 4;
  const choices = wrong.slice();
  choices.splice(label, 0, p.title);
  return {
    id: `npm-q${String(i + 1).padStart(2, '0')}`, question: p.question, choices, label,
    letter: 'ABCD'[label], meta: { title: p.title, summary: p.summary, section: p.section },
  };
});
const tmp = path.join(out, '.items.tmp.json');
fs.writeFileSync(tmp, JSON.stringify(items));
const db = await (await DuckDBInstance.create(':memory:')).connect();
await db.run(`CREATE TABLE mc AS SELECT * FROM read_json('${tmp}', format='array', columns={
  id: 'VARCHAR', question: 'VARCHAR', choices: 'VARCHAR[]', label: 'INTEGER', letter: 'VARCHAR',
  meta: 'STRUCT(title VARCHAR, summary VARCHAR, section INTEGER)'})`);
const q = (s) => s.replace(/'/g, "''");
const o = (name) => q(path.join(out, name));
await db.run(`COPY (SELECT * FROM mc ORDER BY id) TO '${o('npm-mc.parquet')}' (FORMAT PARQUET)`);
await db.run(`COPY (SELECT * FROM mc ORDER BY id) TO '${o('npm-mc.jsonl')}' (FORMAT JSON)`);
// CSV: the list and the struct as JSON text in their cells.
await db.run(`COPY (SELECT id, question, to_json(choices) AS choices, label, letter, to_json(meta) AS meta
  FROM mc ORDER BY id) TO '${o('npm-mc.csv')}' (HEADER, DELIMITER ',')`);
// TSV: the struct flattened into dotted column names.
await db.run(`COPY (SELECT id, question, to_json(choices) AS choices, label, letter,
  meta.title AS "meta.title", meta.summary AS "meta.summary", meta.section AS "meta.section"
  FROM mc ORDER BY id) TO '${o('npm-mc.tsv')}' (HEADER, DELIMITER '\t')`);
fs.unlinkSync(tmp);
const ver = (await (await db.runAndReadAll('SELECT version()')).getRows())[0][0];
fs.writeFileSync(path.join(out, 'SOURCE'), `npm ${version} docs/content/commands (${pages.length} pages, first ${items.length} used)\nwritten by DuckDB ${ver} through @duckdb/node-api\n`);
console.log(`${items.length} items from npm ${version}, DuckDB ${ver}`);
