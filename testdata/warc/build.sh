#!/bin/sh
# Builds crawl.warc.gz: wget (an independent WARC writer) crawls a few zstd
# documentation files from Debian's zstd package, served by Python's
# http.server bound to the loopback address only. Needs: zstd, wget, python3.
# Run from this folder: sh build.sh
set -eu
here=$(pwd)
tmp=$(mktemp -d)
trap 'kill $srv 2>/dev/null || true; rm -rf "$tmp"' EXIT
mkdir "$tmp/site"
cp /usr/share/doc/zstd/TESTING.md /usr/share/doc/zstd/CODE_OF_CONDUCT.md "$tmp/site/"
zcat /usr/share/doc/zstd/README.md.gz > "$tmp/site/README.md"
cp /usr/share/doc/zstd/copyright "$here/copyright"
cat > "$tmp/site/index.html" <<'HTML'
<html><body><a href="README.md">README</a> <a href="TESTING.md">TESTING</a> <a href="CODE_OF_CONDUCT.md">CODE_OF_CONDUCT</a></body></html>
HTML
port=18473
(cd "$tmp/site" && exec python3 -m http.server --bind 127.0.0.1 "$port") >/dev/null 2>&1 &
srv=$!
# wget retries until the server listens (the machine may be slow to start it).
# --warc-header sets a fixed warcinfo field; dates and record ids are wget's own.
(cd "$tmp" && wget -q -r -l 1 --retry-connrefused --waitretry=1 --tries=30 --no-host-directories --warc-file=crawl --no-warc-keep-log \
	--warc-header="operator: Larkspur Marine Works test crawl" "http://127.0.0.1:$port/" || true)
cp "$tmp/crawl.warc.gz" "$here/crawl.warc.gz"
