#!/usr/bin/env bash
# Fit a sample scenario, then check the report a person would open: every SVG parses as XML,
# report.json parses, and report.html loads in a real headless browser (Debian's chromium)
# without failed resources or script errors and produces a screenshot.
set -euo pipefail
cd "$(dirname "$0")/.."
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

cargo run -q -- fit sample-data/film-uptake/experiment.toml --out "$work/report" --quiet

python3 - "$work/report" <<'PY'
import json, pathlib, sys, xml.etree.ElementTree as ET
folder = pathlib.Path(sys.argv[1])
svgs = sorted(folder.glob("*.svg"))
assert svgs, "no SVG figures in the report"
for svg in svgs:
    root = ET.parse(svg).getroot()
    assert root.tag.endswith("svg"), f"{svg.name}: root element is {root.tag}"
report = json.loads((folder / "report.json").read_text())
assert report["schema_version"] == 1
html = (folder / "report.html").read_text()
assert "<script" not in html and "http://" not in html.replace("http://www.w3.org", ""), "report.html must be self-contained"
print(f"{len(svgs)} SVG files parse; report.json and report.html are well formed")
PY

browser=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$browser" ]; then
  echo "chromium not found; install it with: apt-get install -y chromium" >&2
  exit 1
fi
flags=(--headless --no-sandbox --disable-gpu --disable-quic --no-first-run
       --disable-background-networking --disable-component-update --disable-sync
       --user-data-dir="$work/profile" --enable-logging=stderr --v=0)
"$browser" "${flags[@]}" --window-size=1100,2400 --screenshot="$work/shot.png" \
  "file://$work/report/report.html" 2> "$work/browser.log" || true
if [ ! -s "$work/shot.png" ]; then
  echo "no screenshot was produced; browser log:" >&2
  tail -20 "$work/browser.log" >&2
  exit 1
fi
if grep -E "Uncaught|Failed to load resource|CONSOLE.*[Ee]rror" "$work/browser.log"; then
  echo "report.html logged errors in the browser" >&2
  exit 1
fi
"$browser" "${flags[@]}" --dump-dom "file://$work/report/report.html" 2>/dev/null | grep -q "<h2>Parameters</h2>"
echo "report.html loads in $("$browser" --version 2>/dev/null | head -1) and renders a screenshot"
