#!/usr/bin/env bash
# Installs the Debian packages the build and the tests need, only those missing. Idempotent; needs root (or sudo).
set -euo pipefail
# `install-deps.sh build`: only what compiling needs (the Dockerfile's build stage).
build_pkgs=(pkg-config libssl-dev make gcc g++)
# The tests also need the reference venv and systemd-analyze (it checks deploy/systemd).
test_pkgs=(python3-venv systemd)
if [ "${1:-}" = build ]; then
  pkgs=("${build_pkgs[@]}")
else
  pkgs=("${build_pkgs[@]}" "${test_pkgs[@]}")
fi
missing=()
for p in "${pkgs[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  echo "install-deps: installing ${missing[*]}" >&2
  sudo_cmd=""
  [ "$(id -u)" = 0 ] || sudo_cmd="sudo"
  $sudo_cmd apt-get update -qq >&2
  DEBIAN_FRONTEND=noninteractive $sudo_cmd apt-get install -y -qq "${missing[@]}" >&2
fi
bash "$(dirname "$0")/install-monitoring-deps.sh"
