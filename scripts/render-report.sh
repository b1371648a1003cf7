#!/usr/bin/env bash
# Render a settle HTML report to a PNG with headless Chromium, to look at the layout.
#
# Usage:
#   scripts/render-report.sh REPORT.html [OUT.png] [WIDTHxHEIGHT]
#   scripts/render-report.sh --sample [OUT.png] [WIDTHxHEIGHT]
#
# --sample renders the hand-built test run of tests/report_render.rs (an invented "tarn"
# case) by running that test with SETTLE_REPORT_SAMPLE_DIR set, then screenshots it.
# OUT.png defaults to the report's name with .png; the window defaults to 1200x2400 (the
# screenshot is cut at that height: pass a taller window for the whole page).
#
# Needs the Debian package `chromium` (apt-get install chromium). Not run in CI: it is a
# tool for people checking how a report looks. Chromium gets a throw-away profile and every
# background network feature switched off; the report itself references nothing outside the
# file.
set -euo pipefail

die() { echo "render-report: $*" >&2; exit 1; }

[[ $# -ge 1 ]] || die "usage: $0 REPORT.html|--sample [OUT.png] [WIDTHxHEIGHT]"

here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
sample_dir=""
profile=""
trap 'rm -rf "$profile" "$sample_dir"' EXIT
if [[ $1 == --sample ]]; then
    sample_dir="$(mktemp -d)"
    (cd "$here" && SETTLE_REPORT_SAMPLE_DIR="$sample_dir" \
        cargo test --quiet --test report_render html_is_well_formed >/dev/null)
    report="$sample_dir/sample.html"
    [[ -f $report ]] || die "the sample test did not write $report"
    out="${2:-$here/target/report-sample.png}"
else
    report="$1"
    [[ -f $report ]] || die "no such file: $report"
    out="${2:-${report%.*}.png}"
fi
size="${3:-1200x2400}"
[[ $size =~ ^[0-9]+x[0-9]+$ ]] || die "window size must look like 1200x2400, got $size"

browser="$(command -v chromium || command -v chromium-browser || true)"
[[ -n $browser ]] || die "chromium not found; install the Debian package: apt-get install chromium"

profile="$(mktemp -d)"
abs="$(cd "$(dirname "$report")" && pwd)/$(basename "$report")"
mkdir -p "$(dirname "$out")"

"$browser" --headless --no-sandbox --disable-gpu --disable-background-networking \
    --disable-component-update --disable-sync --no-first-run --hide-scrollbars \
    --user-data-dir="$profile" --screenshot="$out" --window-size="${size/x/,}" \
    "file://$abs" 2>/dev/null

[[ -s $out ]] || die "chromium wrote no screenshot"
echo "$out"
