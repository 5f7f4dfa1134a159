#!/usr/bin/env bash
# Build the season page of the example (chart season --html), check that every glyph links to a night chart that
# exists, and take a screenshot of the page in headless Chromium to look at. Not part of CI.
#
# Needs the dipwatch sources, Python 3 and Chromium (Debian: apt-get install chromium). Rerun from the repo root:
#   bash tools/check_season_page.sh [OUT_DIR]      (default: target/season-page)
# The screenshot is OUT_DIR/screenshot.png.
set -euo pipefail
cd "$(dirname "$0")/.."
out="${1:-target/season-page}"
rm -rf "$out"
mkdir -p "$out"
cargo run --quiet --release -- chart season --sites sites.example.toml --targets targets.example.csv \
  --from 2027-03-01 --to 2027-04-30 --out "$out/season.svg" --html "$out"

# Every link of the page (the grid's glyphs and the event list) must name an existing night chart.
python3 - "$out" <<'EOF'
import html.parser, os, sys
out = sys.argv[1]
class Links(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.hrefs = []
    def handle_starttag(self, tag, attrs):
        if tag == "a":
            self.hrefs += [v for k, v in attrs if k == "href"]
page = Links()
page.feed(open(os.path.join(out, "index.html"), encoding="utf-8").read())
glyphs = open(os.path.join(out, "index.html"), encoding="utf-8").read().count('class="event ')
missing = [h for h in page.hrefs if not os.path.isfile(os.path.join(out, h))]
print(f"{len(page.hrefs)} links, {glyphs} glyphs, {len(missing)} missing")
if missing or not page.hrefs or len(page.hrefs) < glyphs:
    sys.exit(f"broken or missing links: {missing[:10]}")
EOF

browser=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$browser" ]; then
  echo "no chromium found: links checked, screenshot skipped (apt-get install chromium)" >&2
  exit 0
fi
"$browser" --headless --no-sandbox --disable-gpu --hide-scrollbars --window-size=1280,1400 \
  --screenshot="$out/screenshot.png" "file://$(pwd)/$out/index.html" 2>/dev/null
echo "screenshot: $out/screenshot.png"
