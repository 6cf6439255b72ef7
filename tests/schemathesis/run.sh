#!/usr/bin/env bash
# Schemathesis against the running service, described by fhir-profiles/openapi.yaml.
# The service runs as deployed with an upstream: bench/fhir_stub.py plays the
# EHR's FHIR server, so that the patient route and notifications are live.
# Checks: no server error, status codes, content types, response schemas and
# headers as the description says, and 405 for undeclared methods.
#
#   tests/schemathesis/run.sh [BINARY] [MAX_EXAMPLES]
#
# Needs: pip install -r tests/schemathesis/requirements.txt. Exit status is schemathesis's.
set -euo pipefail
cd "$(dirname "$0")/../.."
BIN=${1:-target/debug/calcium-cds}
MAX_EXAMPLES=${2:-100}
PORT=${PORT:-18181}
STUB_PORT=${STUB_PORT:-18190}

python3 bench/fhir_stub.py "$STUB_PORT" &
STUB=$!
CALCIUM_CDS_LISTEN="127.0.0.1:$PORT" CALCIUM_CDS_LOG=warn CALCIUM_CDS_FHIR_BASE_URL="http://127.0.0.1:$STUB_PORT" \
  "$BIN" serve &
SERVICE=$!
trap 'kill $SERVICE $STUB 2>/dev/null || true' EXIT
for _ in $(seq 100); do
  curl -sf "http://127.0.0.1:$PORT/readyz" >/dev/null && break
  sleep 0.1
done

schemathesis run fhir-profiles/openapi.yaml --url "http://127.0.0.1:$PORT" \
  --checks not_a_server_error,status_code_conformance,content_type_conformance,response_schema_conformance,response_headers_conformance,unsupported_method \
  --max-examples "$MAX_EXAMPLES"
# The service must still be alive after the run.
kill -0 $SERVICE
