#!/usr/bin/env bash
# Soak: a mixed load of valid, invalid and oversize requests (bench/soak.lua)
# for DURATION against the release binary, with bench/fhir_stub.py as the
# EHR for the patient route. Samples RSS and open file descriptors every
# SAMPLE seconds and prints the curve; at the end reads the service's own
# /metrics and prints the requests by status class. Pass: zero 5xx, RSS
# flat, no descriptor growth.
#
#   bench/soak.sh                         # 10 minutes
#   DURATION=60s bench/soak.sh
#
# Needs wrk (apt-get install wrk), python3, curl.
set -euo pipefail
cd "$(dirname "$0")/.."
DURATION=${DURATION:-600s}
CONNECTIONS=${CONNECTIONS:-16}
SAMPLE=${SAMPLE:-10}
PORT=${PORT:-18280}
STUB_PORT=${STUB_PORT:-18290}
export VALID_FILE=${VALID_FILE:-fhir-profiles/examples/total-calcium-si-units.json}
export OTHER_FILE=${OTHER_FILE:-fhir-profiles/examples/set-aside-mix.json}

command -v wrk >/dev/null || { echo "wrk is not installed (apt-get install wrk)" >&2; exit 1; }
cargo build --quiet --release -p calcium-cds
python3 bench/fhir_stub.py "$STUB_PORT" &
STUB=$!
CALCIUM_CDS_LISTEN="127.0.0.1:$PORT" CALCIUM_CDS_LOG=warn CALCIUM_CDS_FHIR_BASE_URL="http://127.0.0.1:$STUB_PORT" \
  target/release/calcium-cds serve &
PID=$!
trap 'kill $PID $STUB 2>/dev/null || true' EXIT
until curl -sf "http://127.0.0.1:$PORT/readyz" >/dev/null; do sleep 0.05; done

echo "machine: $(nproc) cores; duration $DURATION, connections $CONNECTIONS"
echo "t_s rss_mb fds"
T0=$(date +%s)
( while kill -0 $PID 2>/dev/null; do
    rss=$(awk '/VmRSS/ {printf "%.1f", $2/1024}' /proc/$PID/status)
    fds=$(ls /proc/$PID/fd | wc -l)
    echo "$(( $(date +%s) - T0 )) $rss $fds"
    sleep "$SAMPLE"
  done ) &
SAMPLER=$!
RESULT=$(wrk -t1 -c"$CONNECTIONS" -d"$DURATION" --timeout 10s -s bench/soak.lua "http://127.0.0.1:$PORT" | awk '/^RESULT/')
kill $SAMPLER 2>/dev/null || true
echo "final $(( $(date +%s) - T0 )) $(awk '/VmRSS/ {printf "%.1f", $2/1024}' /proc/$PID/status) $(ls /proc/$PID/fd | wc -l)"
read -r _ N RPS P50 P99 NON2XX SOCK <<<"$RESULT"
echo "wrk: $N requests, $RPS req/s, p50 $((P50/1000)) ms, p99 $((P99/1000)) ms, non-2xx $NON2XX, socket errors $SOCK"
echo "service /metrics, requests by status:"
curl -s "http://127.0.0.1:$PORT/metrics" | awk -F'status="' '/^calcium_cds_http_requests_total\{/ {
    split($2, a, "\""); n = $0; sub(/.* /, "", n); by[a[1]] += n; if (a[1] ~ /^5/) five += n }
  END { for (s in by) printf "  %s %d\n", s, by[s]; printf "SERVER_ERRORS %d\n", five + 0 }'
