#!/usr/bin/env bash
# Render settle HTML reports to PNG with headless Chromium, to look at the layout.
#
# Usage:
#   scripts/render-report.sh REPORT.html [OUT.png] [WIDTHxHEIGHT]
#   scripts/render-report.sh --sample [OUT.png] [WIDTHxHEIGHT]
#   scripts/render-report.sh --samples [OUTDIR] [WIDTHxHEIGHT]
#
# --sample renders the hand-built test run of tests/report_render.rs (an invented "tarn"
# case) by running that test with SETTLE_REPORT_SAMPLE_DIR set, then screenshots it.
#
# --samples writes and renders the three reports a reviewer should look at, from the
# synthetic samples of this repository: a converged run (samples/duct-bend-07), a diverging
# run that ends in a crash (samples/mixer-22), and a mesh study of three variants of
# duct-bend-07 whose drag is scaled by 1.06, 1.015 and 1 (coarse to fine; invented numbers,
# made here with awk in a temporary directory). OUTDIR (default target/report-samples) gets
# converged.html, diverging.html, mesh.html and a PNG of each; with ImageMagick installed,
# each PNG is also cut into page-sized pieces (NAME-0.png, NAME-1.png, ...) that an image
# viewer shows at full size.
#
# OUT.png defaults to the report's name with .png; the window defaults to 1200x2400 (1200x6400
# for --samples). The screenshot is cut at the window height: pass a taller window for the
# whole page.
#
# Needs the Debian package `chromium` (apt-get install chromium). Not run in CI: it is a
# tool for people checking how a report looks. Chromium gets a throw-away profile and every
# background network feature switched off; the reports reference nothing outside the file.
set -euo pipefail

die() { echo "render-report: $*" >&2; exit 1; }

[[ $# -ge 1 ]] || die "usage: $0 REPORT.html|--sample|--samples [OUT] [WIDTHxHEIGHT]"

here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
sample_dir=""
profile=""
trap 'rm -rf "$profile" "$sample_dir"' EXIT

browser="$(command -v chromium || command -v chromium-browser || true)"
[[ -n $browser ]] || die "chromium not found; install the Debian package: apt-get install chromium"

# shot REPORT.html OUT.png WIDTHxHEIGHT
shot() {
    local report="$1" out="$2" size="$3"
    [[ $size =~ ^[0-9]+x[0-9]+$ ]] || die "window size must look like 1200x2400, got $size"
    profile="$(mktemp -d)"
    local abs
    abs="$(cd "$(dirname "$report")" && pwd)/$(basename "$report")"
    mkdir -p "$(dirname "$out")"
    "$browser" --headless --no-sandbox --disable-gpu --disable-background-networking \
        --disable-component-update --disable-sync --no-first-run --hide-scrollbars \
        --user-data-dir="$profile" --screenshot="$out" --window-size="${size/x/,}" \
        "file://$abs" 2>/dev/null
    rm -rf "$profile"
    profile=""
    [[ -s $out ]] || die "chromium wrote no screenshot of $report"
    echo "$out"
}

# pieces OUT.png: cut into 1300-pixel pages when ImageMagick is there.
pieces() {
    local png="$1" im
    im="$(command -v magick || true)"
    [[ -n $im ]] || { [[ -x /usr/bin/convert ]] && im=/usr/bin/convert; } || true
    [[ -n $im ]] || return 0
    "$im" "$png" -crop x1300 +repage "${png%.png}-%d.png" 2>/dev/null || true
}

if [[ $1 == --samples ]]; then
    out_dir="${2:-$here/target/report-samples}"
    size="${3:-1200x6400}"
    mkdir -p "$out_dir"
    (cd "$here" && cargo build --quiet --locked)
    settle="$here/target/debug/settle"
    sample_dir="$(mktemp -d)"
    for grid in coarse:1.06 medium:1.015 fine:1.0; do
        name="${grid%%:*}"
        factor="${grid##*:}"
        case_dir="$sample_dir/duct-bend-07-$name"
        mkdir -p "$case_dir"
        sed "s/^name = .*/name = \"duct-bend-07-$name\"/" \
            "$here/samples/duct-bend-07/settle.toml" >"$case_dir/settle.toml"
        # Scale the drag both where tarn prints it and in the monitor file, so the two stay
        # one quantity.
        awk -v f="$factor" '$1 == "forces" && $2 == "drag" {
                line = $0; sub(/drag [^ ]+/, sprintf("drag %.4e", $3 * f), line); print line; next
            } { print }' "$here/samples/duct-bend-07/tarn.log" >"$case_dir/tarn.log"
        awk -F, -v f="$factor" 'BEGIN { OFS = "," }
            /^[0-9]/ { $2 = sprintf("%.4e", $2 * f) } { print }' \
            "$here/samples/duct-bend-07/forces.csv" >"$case_dir/forces.csv"
    done
    "$settle" report "$here/samples/duct-bend-07" -o "$out_dir/converged.html" >/dev/null
    "$settle" report "$here/samples/mixer-22" -o "$out_dir/diverging.html" >/dev/null
    "$settle" report --mesh-study "$sample_dir"/duct-bend-07-{coarse,medium,fine} \
        --monitor drag --cells 300000 900000 2700000 -o "$out_dir/mesh.html" >/dev/null
    for r in converged diverging mesh; do
        shot "$out_dir/$r.html" "$out_dir/$r.png" "$size"
        pieces "$out_dir/$r.png"
    done
    exit 0
fi

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
shot "$report" "$out" "${3:-1200x2400}"
