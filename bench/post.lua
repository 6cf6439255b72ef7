-- wrk script: POST the file named by BODY_FILE as FHIR JSON; print one
-- machine-readable RESULT line at the end (requests, req/s, p50 us, p99 us, non-2xx, socket errors).
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/fhir+json"
local f = assert(io.open(os.getenv("BODY_FILE"), "rb"))
wrk.body = f:read("*a")
f:close()

done = function(summary, latency, requests)
  local e = summary.errors
  io.write(string.format("RESULT %d %.1f %d %d %d %d\n",
    summary.requests, summary.requests / (summary.duration / 1e6),
    latency:percentile(50), latency:percentile(99),
    e.status, e.connect + e.read + e.write + e.timeout))
end
