#!/bin/sh
# Builds crawl.warc.gz: HTML documentation pages shipped by Debian packages,
# served by Python's http.server bound to the loopback interface only and
# saved by GNU Wget's --warc-file. Nothing leaves the machine: the server
# listens on 127.0.0.1 and every URL below points at it.
#
# Run as root on Debian 12 (bookworm): sh testdata/webcrawl/build.sh
set -eu
here=$(cd "$(dirname "$0")" && pwd)
export DEBIAN_FRONTEND=noninteractive
apt-get install -y -o DPkg::Lock::Timeout=300 --no-install-recommends wget python3 python3-doc debian-reference-en \
	nodejs valgrind libffi8 zlib1g-dev base-passwd libxslt1-dev bc >/dev/null
port=18765
work=$(mktemp -d)
python3 -m http.server --bind 127.0.0.1 --directory /usr/share/doc "$port" >"$work/server.log" 2>&1 &
server=$!
trap 'kill $server; rm -rf "$work"' EXIT
for i in 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 20; do
	wget -q -O /dev/null "http://127.0.0.1:$port/" && break
	sleep 1
done
base=http://127.0.0.1:$port
sed "s|^|$base/|" "$here/urls.txt" >"$work/urls"
cd "$work"
# wget exits 8 when a URL answered with an error status (the 404 below).
wget --no-verbose --tries=1 --warc-file=crawl --input-file=urls --max-redirect=0 \
	--directory-prefix=pages --no-host-directories || test $? -eq 8
cp crawl.warc.gz "$here/crawl.warc.gz"
wget --version | head -1 >"$here/TOOLS"
python3 --version >>"$here/TOOLS"
for p in python3-doc debian-reference-en nodejs valgrind libffi8 zlib1g-dev base-passwd libxslt1-dev bc; do
	dpkg-query -W -f '${Package} ${Version}\n' "$p" >>"$here/TOOLS"
done
# The pages' licences: each package's Debian copyright file.
mkdir -p "$here/licenses"
for p in python3-doc debian-reference-en nodejs valgrind libffi8 zlib1g-dev base-passwd libxslt1-dev bc; do
	cp "/usr/share/doc/$p/copyright" "$here/licenses/$p.copyright"
done
