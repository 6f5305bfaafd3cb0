#!/usr/bin/env bash
# Installs what the drift and status-page tests need, only if missing: Debian's prometheus (the
# server and promtool), chromium (headless, for the status page test) and a font for its
# screenshots. Recommended packages are left out (no node exporter daemon). Services a package
# would start are kept from starting with Debian's policy-rc.d mechanism. Idempotent; needs root or sudo.
set -euo pipefail
pkgs=(prometheus chromium fonts-dejavu-core)
missing=()
for p in "${pkgs[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
[ ${#missing[@]} -eq 0 ] && exit 0
echo "install-monitoring-deps: installing ${missing[*]}" >&2
sudo_cmd=""
[ "$(id -u)" = 0 ] || sudo_cmd="sudo"
policy=/usr/sbin/policy-rc.d
made_policy=0
if [ ! -e "$policy" ]; then
  printf '#!/bin/sh\n# written by sieveline install-monitoring-deps.sh for the length of one install\nexit 101\n' | $sudo_cmd tee "$policy" >/dev/null
  $sudo_cmd chmod +x "$policy"
  made_policy=1
fi
cleanup() { [ "$made_policy" = 1 ] && $sudo_cmd rm -f "$policy"; return 0; }
trap cleanup EXIT
$sudo_cmd apt-get update -qq >&2
DEBIAN_FRONTEND=noninteractive $sudo_cmd apt-get install -y -qq --no-install-recommends "${missing[@]}" >&2
