// Writes pages.warc.gz with the npm package warcio (warcio.js, Apache-2.0):
// HTML documentation pages shipped by Debian packages, stored as WARC/1.1
// response and resource records, one gzip member per record. Bodies are
// compressed and chunked by Node's own zlib and by hand-written HTTP/1.1
// chunk framing, so a reader must undo Content-Encoding (gzip, br, deflate)
// and Transfer-Encoding: chunked the way a browser would.
//
// Run with: sh build.sh (installs warcio 2.4.11 into a temporary folder).
import { WARCRecord, WARCSerializer } from "warcio";
import fs from "node:fs";
import zlib from "node:zlib";

const out = process.argv[2];
const warcVersion = "WARC/1.1";
const date = "2026-12-02T12:00:00Z";
const parts = [];

async function add(record) {
  parts.push(await WARCSerializer.serialize(record, { gzip: true }));
}

function chunked(buf, size) {
  const pieces = [];
  for (let i = 0; i < buf.length; i += size) {
    const c = buf.subarray(i, i + size);
    pieces.push(Buffer.from(c.length.toString(16) + "\r\n"), c, Buffer.from("\r\n"));
  }
  pieces.push(Buffer.from("0\r\n\r\n"));
  return Buffer.concat(pieces);
}

function* once(buf) {
  yield new Uint8Array(buf);
}

await add(await WARCRecord.createWARCInfo({ filename: "pages.warc.gz", warcVersion },
  { software: "warcio.js 2.4.11", description: "Debian documentation pages" }));

const doc = "/usr/share/doc/";
const pages = [
  // [path, encoding, chunked]
  ["python3-doc/html/tutorial/interactive.html", "gzip", true],
  ["python3-doc/html/tutorial/whatnow.html", "br", false],
  ["valgrind/html/dist.readme-packagers.html", "deflate", false],
  // A table-of-contents stub: no main text.
  ["valgrind/html/FAQ.html", "", false],
  ["libffi8/html/Memory-Usage.html", "", true],
  ["nodejs/api/documentation.html", "gzip", false],
];
for (const [path, enc, isChunked] of pages) {
  let body = fs.readFileSync(doc + path);
  const httpHeaders = { "Content-Type": "text/html; charset=utf-8" };
  if (enc === "gzip") body = zlib.gzipSync(body);
  if (enc === "br") body = zlib.brotliCompressSync(body);
  if (enc === "deflate") body = zlib.deflateSync(body);
  if (enc) httpHeaders["Content-Encoding"] = enc;
  if (isChunked) {
    body = chunked(body, 4096);
    httpHeaders["Transfer-Encoding"] = "chunked";
  } else {
    httpHeaders["Content-Length"] = String(body.length);
  }
  await add(WARCRecord.create({ url: "http://docs.larkspur.test/" + path, date, type: "response",
    warcVersion, httpHeaders, statusline: "HTTP/1.1 200 OK" }, once(body)));
}

// A page saved as a resource record (no HTTP envelope).
await add(WARCRecord.create({ url: "file://" + doc + "libffi8/html/Structures.html", date, type: "resource",
  warcVersion, warcHeaders: { "Content-Type": "text/html" } },
  once(fs.readFileSync(doc + "libffi8/html/Structures.html"))));

// Records a reader must skip by rule.
await add(WARCRecord.create({ url: "http://docs.larkspur.test/moved", date, type: "response", warcVersion,
  statusline: "HTTP/1.1 302 Found",
  httpHeaders: { Location: "http://docs.larkspur.test/python3-doc/html/", "Content-Length": "0" } }, once(Buffer.alloc(0))));
const err = Buffer.from("<html><body><h1>Internal Server Error</h1></body></html>\n");
await add(WARCRecord.create({ url: "http://docs.larkspur.test/broken", date, type: "response", warcVersion,
  statusline: "HTTP/1.1 500 Internal Server Error",
  httpHeaders: { "Content-Type": "text/html", "Content-Length": String(err.length) } }, once(err)));
const png = fs.readFileSync(doc + "python3-doc/html/_static/py.png");
await add(WARCRecord.create({ url: "http://docs.larkspur.test/py.png", date, type: "response", warcVersion,
  statusline: "HTTP/1.1 200 OK",
  httpHeaders: { "Content-Type": "image/png", "Content-Length": String(png.length) } }, once(png)));
await add(WARCRecord.create({ url: "http://docs.larkspur.test/python3-doc/html/tutorial/interactive.html", date,
  type: "metadata", warcVersion, warcHeaders: { "Content-Type": "application/warc-fields" } },
  once(Buffer.from("via: http://docs.larkspur.test/python3-doc/html/tutorial/\r\n"))));

fs.writeFileSync(out, Buffer.concat(parts.map((p) => Buffer.from(p))));
