#!/bin/sh
# Copies a pretty-printed JSON document (one value over many lines, not
# JSON Lines) from the API documentation that the nodejs package ships,
# and the Node.js licence. Run from this folder: sh build.sh
set -eu
cp /usr/share/doc/nodejs/api/string_decoder.json.gz .
sed -n '3,22p' /usr/share/doc/nodejs/copyright > LICENSE
# The eval set of ../evalsets (npm command documentation, Artistic-2.0,
# licence in ../evalsets/LICENSE) as one pretty-printed JSON array,
# written by Node.js's JSON.stringify.
node -e 'const fs=require("fs");const rows=fs.readFileSync("../evalsets/npm-mc.jsonl","utf8").trim().split("\n").map(JSON.parse);fs.writeFileSync("npm-mc.array.json",JSON.stringify(rows,null,2)+"\n")'
