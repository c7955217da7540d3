#!/usr/bin/env bash
# Screenshots of the demo's pages for the docs (docs/images/), taken with
# Debian's headless chromium:
#   bash testdata/gen/screenshots.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
make build >/dev/null
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
bin/tauvox demo --out "$work/demo" >/dev/null
report=$(ls "$work"/demo/session-*/qa/report.html | tail -n 1)
shot() { # page output height
	chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
		--disable-background-networking --disable-component-update --disable-sync \
		--user-data-dir="$work/profile" --screenshot="$2" --window-size=1200,"$3" "file://$1" 2>/dev/null
}
mkdir -p docs/images
shot "$work/demo/index.html" docs/images/demo-index.png 900
shot "$report" docs/images/qa-report.png 2400
shot "$work/demo/history/index.html" docs/images/history-index.png 2000
ls -l docs/images
