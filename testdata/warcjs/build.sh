#!/bin/sh
# Builds pages.warc.gz with the npm package warcio (see build.mjs).
# Run as root on Debian 12 (bookworm): sh testdata/warcjs/build.sh
set -eu
here=$(cd "$(dirname "$0")" && pwd)
export DEBIAN_FRONTEND=noninteractive
apt-get install -y -o DPkg::Lock::Timeout=300 --no-install-recommends nodejs python3-doc valgrind libffi8 >/dev/null
# Debian's nodejs ships npm separately; some nodejs builds include it.
command -v npm >/dev/null || apt-get install -y -o DPkg::Lock::Timeout=300 --no-install-recommends npm >/dev/null
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$work"
npm init -y >/dev/null
npm install --silent warcio@2.4.11
cp "$here/build.mjs" .
node build.mjs "$here/pages.warc.gz"
cp node_modules/warcio/LICENSE "$here/LICENSE.warcio"
mkdir -p "$here/licenses"
for p in python3-doc valgrind libffi8 nodejs; do
	cp "/usr/share/doc/$p/copyright" "$here/licenses/$p.copyright"
done
node --version | sed 's/^/node /' >"$here/TOOLS"
echo "warcio 2.4.11" >>"$here/TOOLS"
