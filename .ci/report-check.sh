#!/usr/bin/env bash
# The report as a user sees it: makes a simulated scenario, fits, maps (and
# matches, where the command exists), writes the report, and renders it in
# headless Chromium with every host name unresolvable. Fails when the page
# names a web address or holds a script, when two runs differ, when the
# browser does not render it, when a figure is missing from the rendered
# page, or when the browser's console shows anything.
#
# Runs as root on a fresh machine with no standard input, like .ci/run; it
# installs Chromium itself when it is not there.
set -euo pipefail
cd "$(dirname "$0")/.."
export DEBIAN_FRONTEND=noninteractive
export GOFLAGS=-mod=readonly

step() { printf '\n== %s\n' "$*"; }
fail() { echo "report-check: $*" >&2; exit 1; }

# The figures every report holds: errors, error vectors, uncertainty map,
# calibration.
want_figures=4

browser=""
for b in chromium chromium-browser; do
  if command -v "$b" >/dev/null 2>&1; then browser=$b; break; fi
done
if [ -z "$browser" ]; then
  step "installing Chromium"
  apt-get update -qq
  apt-get install -y -qq chromium >/dev/null
  browser=chromium
fi

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

step "build"
go build -o "$work/ferry" ./cmd/ferry
ferry="$work/ferry"

step "scenario"
scen="$work/scenario"
"$ferry" simulate "$scen" --seed 1
for f in landmarks.csv cells.csv candidates.csv; do
  [ -s "$scen/$f" ] || fail "the scenario has no $f"
done

step "fit, map, match"
cd "$work"
"$ferry" fit scenario/landmarks.csv -o t.json
"$ferry" map t.json scenario/cells.csv -o mapped.csv
report_args=(scenario/landmarks.csv --transform t.json --mapped mapped.csv)
if "$ferry" match --help >/dev/null 2>&1; then
  "$ferry" match t.json scenario/cells.csv scenario/candidates.csv -o matches.csv || [ $? -eq 3 ]
  report_args+=(--matches matches.csv)
else
  echo "(no match command yet: the report goes without --matches)"
fi

step "report"
"$ferry" report "${report_args[@]}" -o report.html | tee report.out
grep -q "$want_figures figures" report.out || fail "ferry report did not draw $want_figures figures"
mv report.html first.html
"$ferry" report "${report_args[@]}" -o report.html >/dev/null
cmp -s first.html report.html || fail "two runs on the same inputs gave different pages"
# Without --transform the landmarks are fitted for the report.
"$ferry" report scenario/landmarks.csv -o fitted.html >/dev/null

step "self-contained"
for page in report.html fitted.html; do
  if grep -Eiq 'https?://' "$page"; then
    grep -Eio '.{40}https?://.{40}' "$page" | head -3
    fail "$page names a web address"
  fi
  if grep -Eiq '<script|<link|@import|@font-face' "$page"; then
    fail "$page holds a script, a link or a font to fetch"
  fi
done

step "render in $browser, network blocked"
chrome=("$browser" --headless=new --no-sandbox --disable-gpu --hide-scrollbars
  --user-data-dir="$work/profile" --host-resolver-rules="MAP * ~NOTFOUND"
  --enable-logging=stderr --v=0)
for page in report.html fitted.html; do
  timeout 120 "${chrome[@]}" --dump-dom "file://$work/$page" >"$page.dom" 2>"$page.log" ||
    fail "$browser could not render $page (see its log below)$(echo; tail -20 "$page.log")"
  grep -q '</html>' "$page.dom" || fail "$page: the browser dumped no page"
  grep -q '<h1>Registration report</h1>' "$page.dom" || fail "$page: the rendered page has no heading"
  svgs=$(grep -o '<svg ' "$page.dom" | wc -l)
  labelled=$(grep -o 'role="img"' "$page.dom" | wc -l)
  echo "$page: $svgs inline SVG figures, $labelled labelled"
  [ "$svgs" -eq "$want_figures" ] && [ "$labelled" -eq "$want_figures" ] ||
    fail "$page: $svgs figures rendered, want $want_figures"
  if grep -q ':CONSOLE' "$page.log"; then
    grep ':CONSOLE' "$page.log"
    fail "$page: the browser's console is not empty"
  fi
done
timeout 120 "${chrome[@]}" --window-size=1280,6000 --screenshot="$work/report.png" "file://$work/report.html" \
  >/dev/null 2>"$work/shot.log" || fail "$browser could not take a screenshot"
[ -s "$work/report.png" ] || fail "no screenshot"
if /usr/bin/python3 -c 'import PIL' 2>/dev/null; then
  /usr/bin/python3 - "$work/report.png" <<'PY' || fail "the screenshot is blank"
import sys
from PIL import Image
im = Image.open(sys.argv[1]).convert("RGB")
small = im.resize((160, 750))
inked = sum(1 for p in small.getdata() if sum(p) < 600)
share = inked / (160 * 750)
print(f"screenshot {im.size[0]}x{im.size[1]}: {100 * share:.1f} % inked")
sys.exit(0 if share > 0.02 else 1)
PY
fi

echo
echo "report check passed"
