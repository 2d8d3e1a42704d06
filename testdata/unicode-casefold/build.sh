#!/usr/bin/env bash
# Rebuilds this folder from Debian's unicode-data package: the C (common)
# and F (full) entries of CaseFolding.txt, i.e. the full case folding
# (the file's own usage note B, Turkic T entries excluded), with the
# file's header, and the Unicode licence from the package's copyright
# file. Needs apt-get and dpkg-deb.
set -euo pipefail
cd "$(dirname "$0")"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
(cd "$tmp" && apt-get download unicode-data >/dev/null)
dpkg-deb -x "$tmp"/unicode-data_*.deb "$tmp/root"
src="$tmp/root/usr/share/unicode/CaseFolding.txt"
{
  sed -n '1,5p' "$src"
  echo "# Modified by build.sh: only the entries of status C and F are kept (full case folding);"
  echo "# the other comment lines and the S and T entries are left out."
  grep -E '^[0-9A-F]+; [CF];' "$src"
} > CaseFolding-CF.txt
cp "$tmp/root/usr/share/doc/unicode-data/copyright" LICENSE
dpkg-deb -f "$tmp"/unicode-data_*.deb Package Version > SOURCE
echo "$(grep -c '; [CF];' CaseFolding-CF.txt) entries from $(tr '\n' ' ' < SOURCE)"
