#!/usr/bin/env bash
# Load test: POST /fhir/$assess against the bench-only POST /bench/echo (which
# only parses the same bundle to a serde_json::Value and writes it back), each
# driven by wrk for the same duration and connections, on one release binary
# built with the `bench-echo` feature. Prints req/s, p50 and p99 for both and
# the ratios; samples the service's RSS during the run; times start-to-ready.
#
#   bench/load.sh                      # defaults below
#   DURATION=30s CONNECTIONS=32 bench/load.sh
#
# Needs wrk (Debian: apt-get install wrk) and python3. Targets (docs/benchmarks.md):
# $assess req/s >= 0.6x echo, p99 <= 1.5x echo, RSS <= 50 MB, start-to-ready <= 100 ms.
set -euo pipefail
cd "$(dirname "$0")/.."

DURATION=${DURATION:-20s}
CONNECTIONS=${CONNECTIONS:-16}
THREADS=${THREADS:-1}
PORT=${PORT:-18080}
BODY_FILE=${BODY_FILE:-fhir-profiles/examples/total-calcium-si-units.json}
export BODY_FILE

command -v wrk >/dev/null || { echo "wrk is not installed (apt-get install wrk)" >&2; exit 1; }
cargo build --quiet --release -p calcium-cds --features bench-echo
BIN=target/release/calcium-cds

echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)"
echo "body: $BODY_FILE ($(wc -c < "$BODY_FILE") bytes), duration $DURATION, connections $CONNECTIONS, wrk threads $THREADS"
python3 bench/ready_time.py "$BIN" "$PORT" 10

CALCIUM_CDS_LISTEN="127.0.0.1:$PORT" CALCIUM_CDS_LOG=warn CALCIUM_CDS_MAX_IN_FLIGHT=1024 "$BIN" serve &
PID=$!
trap 'kill $PID 2>/dev/null; wait $PID 2>/dev/null || true' EXIT
until curl -sf "http://127.0.0.1:$PORT/readyz" >/dev/null; do sleep 0.05; done

RSS_LOG=$(mktemp)
( while kill -0 $PID 2>/dev/null; do awk '/VmRSS/ {print $2}' /proc/$PID/status >> "$RSS_LOG"; sleep 0.5; done ) &
SAMPLER=$!

run() {  # route -> "requests req/s p50_us p99_us non2xx socket_errors"
  wrk -t"$THREADS" -c"$CONNECTIONS" -d"$DURATION" -s bench/post.lua "http://127.0.0.1:$PORT$1" | awk '/^RESULT/ {print $2, $3, $4, $5, $6, $7}'
}
# Warm both routes, then measure each for the same duration.
wrk -t1 -c4 -d2s -s bench/post.lua "http://127.0.0.1:$PORT/bench/echo" >/dev/null
wrk -t1 -c4 -d2s -s bench/post.lua "http://127.0.0.1:$PORT/fhir/\$assess" >/dev/null
read -r E_N E_RPS E_P50 E_P99 E_BAD E_SOCK < <(run /bench/echo)
read -r A_N A_RPS A_P50 A_P99 A_BAD A_SOCK < <(run '/fhir/$assess')
kill $SAMPLER 2>/dev/null || true
RSS_MAX_KB=$(sort -n "$RSS_LOG" | tail -1)
RSS_FIRST_KB=$(head -1 "$RSS_LOG")

printf '%-14s %10s %10s %10s %8s %8s\n' route req/s p50_ms p99_ms non2xx sockerr
printf '%-14s %10s %10.2f %10.2f %8s %8s\n' /bench/echo "$E_RPS" "$(echo "$E_P50/1000" | bc -l)" "$(echo "$E_P99/1000" | bc -l)" "$E_BAD" "$E_SOCK"
printf '%-14s %10s %10.2f %10.2f %8s %8s\n' '$assess' "$A_RPS" "$(echo "$A_P50/1000" | bc -l)" "$(echo "$A_P99/1000" | bc -l)" "$A_BAD" "$A_SOCK"
printf 'RATIO req/s %.2f (target >= 0.6)   p99 %.2f (target <= 1.5)\n' "$(echo "$A_RPS/$E_RPS" | bc -l)" "$(echo "$A_P99/$E_P99" | bc -l)"
printf 'RSS first %.1f MB, max %.1f MB during the run (target <= 50)\n' "$(echo "$RSS_FIRST_KB/1024" | bc -l)" "$(echo "$RSS_MAX_KB/1024" | bc -l)"
rm -f "$RSS_LOG"
