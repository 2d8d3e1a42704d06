#!/bin/sh
# Copies a pretty-printed JSON document (one value over many lines, not
# JSON Lines) from the API documentation that the nodejs package ships,
# and the Node.js licence. Run from this folder: sh build.sh
set -eu
cp /usr/share/doc/nodejs/api/string_decoder.json.gz .
sed -n '3,22p' /usr/share/doc/nodejs/copyright > LICENSE
