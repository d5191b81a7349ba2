#!/usr/bin/env bash
# End-to-end check of the daemon with a real Prometheus: quietband run
# watches a temporary folder, Prometheus scrapes it every second and
# evaluates deploy/prometheus/alerts.yml; synthesized captures (clean, then
# a CW jammer, then clean again) must drive quietband_interference_active
# to 1 and back to 0 and fire QuietbandInterferenceActive, which a daemon
# restart in the middle keeps firing (and QuietbandStale quiet); the exposition
# must pass `promtool check metrics`; every expression of the Grafana
# dashboard must evaluate. Also: promtool check config and test rules.
# Needs Debian's prometheus package (installed here if missing, without
# starting its service). Prints PASS/FAIL lines; exit 0 only if all pass.
set -euo pipefail
cd "$(dirname "$0")/.."
export GOFLAGS="${GOFLAGS:-} -buildvcs=false"
started=$(date +%s)

fails=0
pass() { echo "PASS: $*"; }
fail() { echo "FAIL: $*"; fails=$((fails + 1)); }
die() { echo "FAIL: $*"; summary; exit 1; }
summary() { echo "e2e: $fails failure(s) in $(($(date +%s) - started)) s"; }

tmp=$(mktemp -d /tmp/quietband-e2e.XXXXXX)
pids=()
cleanup() {
  for p in "${pids[@]}"; do kill "$p" 2>/dev/null || true; done
  for p in "${pids[@]}"; do wait "$p" 2>/dev/null || true; done
  if [ "$fails" -gt 0 ] || [ -n "${E2E_KEEP:-}" ]; then
    echo "e2e: logs kept in $tmp"
    tail -n 20 "$tmp/quietband.log" 2>/dev/null | sed 's/^/  quietband: /' || true
  else
    rm -rf "$tmp"
  fi
}
trap cleanup EXIT

# --- Prometheus and promtool -------------------------------------------
if ! command -v promtool >/dev/null || ! [ -x /usr/bin/prometheus ]; then
  echo "e2e: installing Debian's prometheus package (service not started)"
  made_policy=""
  if [ ! -e /usr/sbin/policy-rc.d ]; then
    # invoke-rc.d and deb-systemd-invoke start nothing while this says 101.
    printf '#!/bin/sh\nexit 101\n' > /usr/sbin/policy-rc.d
    chmod 755 /usr/sbin/policy-rc.d
    made_policy=1
  fi
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq >/dev/null || die "apt-get update"
  apt-get install -y -qq --no-install-recommends prometheus >/dev/null || die "apt-get install prometheus"
  if [ -n "$made_policy" ]; then rm -f /usr/sbin/policy-rc.d; fi
  if command -v systemctl >/dev/null && [ -d /run/systemd/system ]; then
    systemctl disable --now prometheus >/dev/null 2>&1 || true
  fi
fi
promtool --version 2>&1 | head -n 1

free_port() {
  python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1]); s.close()' 2>/dev/null ||
    echo $((20000 + RANDOM % 20000))
}

if promtool check config deploy/prometheus/prometheus.yml >"$tmp/check-config.txt" 2>&1; then
  pass "promtool check config deploy/prometheus/prometheus.yml"
else
  cat "$tmp/check-config.txt"; fail "promtool check config"
fi
if promtool test rules deploy/prometheus/rules_test.yml >"$tmp/test-rules.txt" 2>&1; then
  pass "promtool test rules deploy/prometheus/rules_test.yml"
else
  cat "$tmp/test-rules.txt"; fail "promtool test rules"
fi

# --- quietband ---------------------------------------------------------
go build -o "$tmp/quietband" ./cmd/quietband
qb="$tmp/quietband"
qport=$(free_port)
mkdir -p "$tmp/captures"
cat > "$tmp/quietband.yaml" <<EOF
inputs:
  - name: e2e
    path: $tmp/captures
    settle: 500ms
state_dir: $tmp/state
listen: 127.0.0.1:$qport
rescan_interval: 5s
log_level: info
EOF
"$qb" run --config "$tmp/quietband.yaml" >"$tmp/quietband.log" 2>&1 &
pids+=($!)
qurl="http://127.0.0.1:$qport"

# wait_until SECONDS DESCRIPTION COMMAND...: retry COMMAND twice a second.
wait_until() {
  local limit=$1 what=$2; shift 2
  local end=$(($(date +%s) + limit))
  until "$@" >/dev/null 2>&1; do
    if [ "$(date +%s)" -ge "$end" ]; then fail "$what (waited ${limit} s)"; return 1; fi
    sleep 0.5
  done
  pass "$what"
}
wait_until 30 "quietband /readyz answers 200" curl -fsS "$qurl/readyz" || die "quietband did not start"

# --- Prometheus --------------------------------------------------------
pport=$(free_port)
cat > "$tmp/prometheus.yml" <<EOF
global:
  scrape_interval: 1s
  evaluation_interval: 1s
rule_files:
  - $PWD/deploy/prometheus/alerts.yml
scrape_configs:
  - job_name: quietband
    static_configs:
      - targets: ["127.0.0.1:$qport"]
EOF
/usr/bin/prometheus --config.file="$tmp/prometheus.yml" --storage.tsdb.path="$tmp/prom-data" \
  --web.listen-address="127.0.0.1:$pport" --log.level=warn >"$tmp/prometheus.log" 2>&1 &
pids+=($!)
purl="http://127.0.0.1:$pport"
wait_until 60 "Prometheus ready" curl -fsS "$purl/-/ready" || die "Prometheus did not start"

# has_result PROMQL: the instant query returns at least one sample.
has_result() {
  curl -fsS --get "$purl/api/v1/query" --data-urlencode "query=$1" |
    jq -e '.status == "success" and (.data.result | length) > 0' >/dev/null
}
wait_until 30 "Prometheus scrapes quietband (up == 1)" has_result 'up{job="quietband"} == 1' || die "no scrapes"

# --- captures: clean, jammer, clean ------------------------------------
"$qb" synth --scenario clean --duration 0.2 --seed 101 --out "$tmp/captures/morning" >/dev/null
wait_until 60 "four clean captures analysed" has_result 'quietband_captures_total{result="ok"} >= 4' || die "captures not analysed"
if has_result 'quietband_interference_active{class="cw"} == 0'; then
  pass "no cw interference after clean captures"
else
  fail "cw interference reported after clean captures"
fi

"$qb" synth --scenario cw-spur --duration 0.2 --seed 102 --out "$tmp/captures/spur" >/dev/null
wait_until 60 'quietband_interference_active{class="cw"} is 1 after the jammer capture' \
  has_result 'quietband_interference_active{class="cw"} == 1' || die "interference never reported"
wait_until 30 "alert QuietbandInterferenceActive fires for cw" \
  has_result 'ALERTS{alertname="QuietbandInterferenceActive",alertstate="firing",class="cw"}' || true
if has_result 'quietband_jn_db{class="cw"} > 0'; then pass "quietband_jn_db{class=\"cw\"} present"; else fail "no quietband_jn_db for cw"; fi

# A restart in the middle (issue 18): the live state comes back from the
# event log, so the alert keeps firing and the stale alert stays quiet
# (it computed time() - 0 when the restart zeroed the timestamp).
kill -TERM "${pids[0]}"
wait "${pids[0]}" || fail "quietband exit status $? on SIGTERM before the restart"
restarted=$(date +%s)
"$qb" run --config "$tmp/quietband.yaml" >>"$tmp/quietband.log" 2>&1 &
pids[0]=$!
wait_until 30 "quietband answers again after a restart" curl -fsS "$qurl/readyz" || die "quietband did not restart"
wait_until 30 'quietband_interference_active{class="cw"} is 1 on the first scrapes after the restart' \
  has_result "quietband_interference_active{class=\"cw\"} == 1 and timestamp(quietband_interference_active{class=\"cw\"}) > $restarted" ||
  fail "the restart cleared the interference"
if has_result "ALERTS{alertname=\"QuietbandInterferenceActive\",alertstate=\"firing\",class=\"cw\"}"; then
  pass "alert QuietbandInterferenceActive still firing after the restart"
else
  fail "alert QuietbandInterferenceActive not firing after the restart"
fi
if has_result "time() - quietband_last_capture_timestamp_seconds < 900 and timestamp(quietband_last_capture_timestamp_seconds) > $restarted"; then
  pass "quietband_last_capture_timestamp_seconds kept across the restart (stale alert quiet)"
else
  fail "quietband_last_capture_timestamp_seconds lost on restart"
fi
if has_result 'ALERTS{alertname="QuietbandStale"}'; then fail "QuietbandStale pending or firing after the restart"; else pass "QuietbandStale quiet after the restart"; fi

"$qb" synth --scenario clean --duration 0.2 --seed 103 --out "$tmp/captures/afternoon" >/dev/null
# (the counters started again at the restart: four afternoon captures)
wait_until 60 'quietband_interference_active{class="cw"} back to 0 after clean captures' \
  has_result 'quietband_interference_active{class="cw"} == 0 and on() quietband_captures_total{result="ok"} >= 4' ||
  die "interference never cleared"
wait_until 30 "alert QuietbandInterferenceActive resolved" \
  bash -c "! curl -fsS --get '$purl/api/v1/query' --data-urlencode 'query=ALERTS{alertname=\"QuietbandInterferenceActive\",alertstate=\"firing\",class=\"cw\"}' | jq -e '.data.result | length > 0'" || true
if has_result 'quietband_satellites_acquired >= 4 and quietband_cn0_mean_dbhz > 35'; then
  pass "satellites and C/N0 measured in the synthesized captures"
else
  fail "no satellites or C/N0 series"
fi

# --- exposition lint, dashboard, event log ----------------------------
curl -fsS "$qurl/metrics" > "$tmp/metrics.txt"
lint=$(promtool check metrics < "$tmp/metrics.txt" 2>&1) && lintrc=0 || lintrc=$?
if [ -z "$lint" ] && [ "$lintrc" -eq 0 ]; then
  pass "promtool check metrics prints nothing ($(grep -c '^quietband_' "$tmp/metrics.txt") quietband samples)"
else
  echo "$lint"; fail "promtool check metrics (exit $lintrc)"
fi

bad=0
while IFS= read -r expr; do
  q=${expr//\$instance/.*}
  q=${q//\$input/.*}
  if ! curl -fsS --get "$purl/api/v1/query" --data-urlencode "query=$q" | jq -e '.status == "success"' >/dev/null; then
    echo "  dashboard query fails: $q"; bad=$((bad + 1))
  fi
done < <(jq -r '.panels[].targets[]?.expr' deploy/grafana/quietband-dashboard.json)
if [ "$bad" -eq 0 ]; then pass "every Grafana dashboard query evaluates"; else fail "$bad dashboard queries fail"; fi

if "$qb" verify "$tmp/state/events.jsonl" >"$tmp/verify.txt"; then
  pass "event log verifies: $(cat "$tmp/verify.txt")"
else
  cat "$tmp/verify.txt"; fail "quietband verify"
fi
n=$(curl -fsS "$qurl/api/events?kind=capture" | jq 'length')
if [ "$n" -eq 9 ]; then pass "/api/events lists 9 capture records"; else fail "/api/events lists $n capture records, want 9"; fi

# A clean stop: SIGTERM, exit status 0.
kill -TERM "${pids[0]}"
if wait "${pids[0]}"; then pass "quietband exits 0 on SIGTERM"; else fail "quietband exit status $? on SIGTERM"; fi
pids=("${pids[@]:1}")

summary
[ "$fails" -eq 0 ]
