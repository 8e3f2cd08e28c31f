#!/usr/bin/env bash
# Unpack Debian's nginx binary for the slow-client tests: downloaded with apt-get, unpacked with
# dpkg -x into a cache folder; never installed, never started as a service. Prints its path.
set -euo pipefail
dest="${1:-${XDG_CACHE_HOME:-$HOME/.cache}/curvewise/nginx}"
if [ -x "$dest/usr/sbin/nginx" ]; then echo "$dest/usr/sbin/nginx"; exit 0; fi
command -v apt-get >/dev/null || { echo "apt-get not available" >&2; exit 1; }
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
cd "$work"
if ! apt-get download nginx >/dev/null 2>&1; then
  [ "$(id -u)" = 0 ] || { echo "apt-get download nginx failed (apt lists missing?)" >&2; exit 1; }
  apt-get update -qq >/dev/null
  apt-get download nginx >/dev/null
fi
mkdir -p "$dest"
dpkg -x nginx_*.deb "$dest"
echo "$dest/usr/sbin/nginx"
