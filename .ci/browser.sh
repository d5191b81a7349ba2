#!/usr/bin/env bash
# Browser check of the analyst's report: runs the demo with --report, loads
# the report's index.html in headless Chromium and checks that every image
# loaded and decoded, that nothing raised an error (script, resource or
# Content-Security-Policy), that the page wrote nothing to the console (it
# logs nothing by design, so any console line is a failure), and saves a
# screenshot. Installs Debian's chromium if /usr/bin/chromium is missing.
# Prints PASS/FAIL lines and the screenshot path; exit 0 only if all pass.
set -euo pipefail
cd "$(dirname "$0")/.."
export GOFLAGS="${GOFLAGS:-} -buildvcs=false"
started=$(date +%s)

fails=0
pass() { echo "PASS: $*"; }
fail() { echo "FAIL: $*"; fails=$((fails + 1)); }

if [ ! -x /usr/bin/chromium ]; then
  echo "browser: installing Debian's chromium"
  apt-get update
  DEBIAN_FRONTEND=noninteractive apt-get install -y chromium
fi

tmp=$(mktemp -d /tmp/quietband-browser.XXXXXX)
demo="$tmp/demo"
report="$demo/report"
echo "browser: demo with its report in $report"
timeout 240 go run ./cmd/quietband demo --out "$demo" --report "$report" >"$tmp/demo.txt"
page="$report/index.html"
[ -f "$page" ] || { echo "FAIL: no $page"; exit 1; }

# The flags every run uses: no network, no background services, a
# throw-away profile.
chrome() {
  local profile
  profile=$(mktemp -d "$tmp/profile.XXXXXX")
  timeout 120 /usr/bin/chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
    --disable-background-networking --disable-component-update --disable-sync \
    --user-data-dir="$profile" "$@"
}

# 1. The DOM after load: the page's own check (check.js) writes its
#    findings on <body> in the load event.
chrome --virtual-time-budget=15000 --enable-logging=stderr --v=0 --dump-dom "file://$page" \
  >"$tmp/dom.html" 2>"$tmp/chromium.log" || fail "chromium exited with $? loading the page"
body=$(grep -o '<body [^>]*data-checked="yes"[^>]*>' "$tmp/dom.html" || true)
attr() { sed -n "s/.* $1=\"\([0-9]*\)\".*/\1/p" <<<"$body"; }
if [ -z "$body" ]; then
  fail "the page's self-check did not run (no <body data-checked>)"
else
  images=$(attr data-images)
  broken=$(attr data-broken)
  errors=$(attr data-errors)
  expected=$(grep -o '<img ' "$page" | wc -l)
  if [ "$images" -gt 0 ] && [ "$images" -eq "$expected" ] && [ "$broken" -eq 0 ]; then
    pass "all $images images loaded and decoded (naturalWidth > 0)"
  else
    fail "images: $images on the page (want $expected), $broken broken"
  fi
  if [ "$errors" -eq 0 ]; then
    pass "no script, resource or security-policy errors"
  else
    fail "$errors error event(s) on the page"
  fi
fi
if grep -q 'CONSOLE' "$tmp/chromium.log"; then
  fail "console output:"
  grep 'CONSOLE' "$tmp/chromium.log" | sed 's/^/  /'
else
  pass "nothing on the console"
fi

# 2. A screenshot of the top of the page.
shot="$tmp/report.png"
chrome --hide-scrollbars --window-size=1280,2000 --screenshot="$shot" "file://$page" >/dev/null 2>>"$tmp/chromium.log" || true
if [ -s "$shot" ] && [ "$(head -c 8 "$shot" | od -An -tx1 | tr -d ' \n')" = "89504e470d0a1a0a" ]; then
  pass "screenshot saved"
else
  fail "no screenshot"
fi
echo "screenshot: $shot"
echo "browser: $fails failure(s) in $(($(date +%s) - started)) s"
[ "$fails" -eq 0 ]
