#!/usr/bin/env bash
# Browser check of report.html: builds the release binary, draws the report of the fixture results
# folder (tests/fixtures/study-small, synthetic test data), opens it in headless Chromium, and checks
# that the page loaded (its DOM holds the answer section and one <svg> per chart, and Chromium logged
# no console or network errors) and that the screenshot is not blank.
# Usage: tests/browser/report_screenshot.sh [OUTPUT_DIR]   (CHROMIUM=/path/to/chromium to override)
set -euo pipefail

root="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
out="${1:-$(mktemp -d)}"
mkdir -p "$out"
chromium="${CHROMIUM:-chromium}"
command -v "$chromium" >/dev/null || { echo "error: $chromium not found (apt-get install -y chromium)" >&2; exit 1; }

cargo build --release --bin termwise --manifest-path "$root/Cargo.toml"
study="$out/study"
rm -rf "$study"
cp -r "$root/tests/fixtures/study-small" "$study"
"$root/target/release/termwise" report "$study" --resamples 500 --seed 1 > "$out/report.txt"
page="file://$study/report.html"

flags=(--headless --no-sandbox --disable-gpu --disable-quic --no-first-run
       --disable-background-networking --disable-component-update --disable-sync
       --enable-logging=stderr --v=0)

"$chromium" "${flags[@]}" --user-data-dir="$(mktemp -d)" --dump-dom "$page" \
    > "$out/dom.html" 2> "$out/dom.log"
"$chromium" "${flags[@]}" --user-data-dir="$(mktemp -d)" --screenshot="$out/report.png" \
    --window-size=1400,3000 "$page" 2> "$out/screenshot.log"

fail=0
if ! grep -q "The answer" "$out/dom.html"; then
    echo "error: the loaded page lacks its answer section" >&2; fail=1
fi
charts=$(ls "$study"/charts/*.svg | wc -l)
svgs=$(grep -o "<svg" "$out/dom.html" | wc -l)
if [ "$svgs" -ne "$charts" ]; then
    echo "error: page shows $svgs inline SVGs, expected $charts" >&2; fail=1
fi
if grep -E "CONSOLE|Uncaught|net::ERR_|Not allowed to load" "$out/dom.log" "$out/screenshot.log"; then
    echo "error: Chromium reported page errors (above)" >&2; fail=1
fi
[ -s "$out/report.png" ] || { echo "error: no screenshot written" >&2; exit 1; }
python3 "$root/tests/browser/png_stats.py" "$out/report.png" || fail=1
if [ "$fail" -ne 0 ]; then
    echo "report screenshot check FAILED (files in $out)" >&2
    exit 1
fi
echo "report screenshot check passed: $out/report.png"
