-- wrk script for bench/soak.sh: a cycle of valid, invalid and oversize
-- requests, one after another on every connection.
local function read(path)
  local f = assert(io.open(path, "rb"))
  local s = f:read("*a")
  f:close()
  return s
end

local requests = {}
local i = 0

-- Built in init, after wrk has set the Host header.
init = function(_)
  local fhir = { ["Content-Type"] = "application/fhir+json" }
  local valid = read(os.getenv("VALID_FILE"))
  local other = read(os.getenv("OTHER_FILE"))
  requests = {
  wrk.format("POST", "/fhir/$assess", fhir, valid),                                   -- 200
  wrk.format("POST", "/fhir/$assess", fhir, other),                                   -- 200
  wrk.format("POST", "/fhir/$assess", fhir, "{\"resourceType\": \"Bundle\", "),       -- 400 not JSON
  wrk.format("POST", "/fhir/$assess", fhir, "{\"resourceType\": \"Patient\"}"),      -- 422 not a Bundle
  wrk.format("POST", "/fhir/$assess", fhir, string.rep("[", 500) .. string.rep("]", 500)), -- 400 too deep
  wrk.format("POST", "/fhir/$assess", { ["Content-Type"] = "text/plain" }, valid),   -- 415
  wrk.format("POST", "/fhir/$assess", fhir, string.rep(" ", 1100000) .. valid),       -- 413 over the 1 MiB limit
  wrk.format("POST", "/fhir/Patient/lch-soak-1/$assess", fhir, ""),                   -- 200 via the stub EHR
  wrk.format("POST", "/fhir/Patient/not%20an%20id/$assess", fhir, ""),                -- 400
  wrk.format("GET", "/fhir/metadata"),                                                -- 200
  wrk.format("GET", "/nowhere"),                                                      -- 404
  }
end

request = function()
  i = i % #requests + 1
  return requests[i]
end

done = function(summary, latency, _)
  local e = summary.errors
  io.write(string.format("RESULT %d %.1f %d %d %d %d\n",
    summary.requests, summary.requests / (summary.duration / 1e6),
    latency:percentile(50), latency:percentile(99),
    e.status, e.connect + e.read + e.write + e.timeout))
end
