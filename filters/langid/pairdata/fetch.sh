#!/bin/sh
# Download the Debian packages whose catalogues build.py counts, at the
# versions SOURCES.tsv records, into DIR (apt-get download: no install, no
# root needed beyond apt's cache). A version the archive no longer has is
# fetched at its current version instead, with a warning: the counts then
# differ slightly from words.tsv.gz.
set -eu
dir=${1:?usage: fetch.sh DIR}
here=$(cd "$(dirname "$0")" && pwd)
mkdir -p "$dir"
cd "$dir"
tail -n +2 "$here/SOURCES.tsv" | cut -f1,2 | while IFS="$(printf '\t')" read -r pkg ver; do
	if ! apt-get download "$pkg=$ver" >/dev/null 2>&1; then
		echo "fetch.sh: $pkg $ver is gone from the archive; fetching its current version" >&2
		apt-get download "$pkg" >/dev/null
	fi
done
ls ./*.deb | wc -l
