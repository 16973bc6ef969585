#!/usr/bin/env bash
# Renders a voxperm HTML report in headless Chromium and saves a screenshot, to check by eye
# that the page lays out and its inline SVG plots draw without any network access.
#
# usage: scripts/report_screenshot.sh REPORT.html [OUT.png] [WIDTHxHEIGHT]
# Installs Debian's chromium package when no chromium is on the PATH (needs root, as on the
# project's machines). Not part of `cargo test`: it needs a browser.
set -euo pipefail

report=${1:?usage: $0 REPORT.html [OUT.png] [WIDTHxHEIGHT]}
out=${2:-report.png}
size=${3:-1200x3000}

if ! command -v chromium >/dev/null 2>&1; then
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null
fi

abs=$(cd "$(dirname "$report")" && pwd)/$(basename "$report")
profile=$(mktemp -d)
trap 'rm -rf "$profile"' EXIT

# Every switch that could reach the network is off: the page must stand alone.
chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
    --disable-background-networking --disable-component-update --disable-sync \
    --user-data-dir="$profile" --hide-scrollbars \
    --screenshot="$out" --window-size="${size/x/,}" "file://$abs" 2>/dev/null
echo "wrote $out"
