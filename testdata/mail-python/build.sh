#!/usr/bin/env bash
# Rebuilds this folder: the raw e-mail messages of Python's own e-mail
# test suite (test/test_email/data/msg_*.txt), as Debian ships them in
# libpython3.11-testsuite, and the licence from Debian's copyright file
# of the same Python source (libpython3.11-minimal). Needs apt-get and
# dpkg-deb; run it from anywhere. The files are copied unchanged (all but msg_25.txt, left out).
set -euo pipefail
cd "$(dirname "$0")"
py=python3.11
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
(cd "$tmp" && apt-get download "lib$py-testsuite" "lib$py-minimal" >/dev/null)
for deb in "$tmp"/*.deb; do
  dpkg-deb -x "$deb" "$tmp/root"
done
rm -f msg_*.txt
cp "$tmp/root/usr/lib/$py/test/test_email/data/"msg_*.txt .
rm -f msg_25.txt # a bounce report whose wording we keep out of the tree
cp "$tmp/root/usr/share/doc/lib$py-minimal/copyright" LICENSE
dpkg-deb -f "$tmp"/"lib$py"-testsuite_*.deb Package Version > SOURCE
echo "$(ls msg_*.txt | wc -l) messages from $(tr '\n' ' ' < SOURCE)"
