-- wrk script: POST JSON bodies, each request a distinct reading (no duplicate samples).
-- usage: wrk ... -s bench/post.lua URL -- MODE TOKEN OFFSET NLOTS NTHREADS
--   MODE bare   -> POST /bench/bare/      {"n": n}
--   MODE ingest -> POST /api/v1/readings/ a hole-wall copper reading on lot BENCH-<k>
local threads = {}
local thread_no = 0

function setup(thread)
  thread:set("tid", thread_no)
  thread_no = thread_no + 1
  table.insert(threads, thread)
end

function init(args)
  mode = args[1] or "bare"
  token = args[2] or ""
  offset = tonumber(args[3] or "0")
  nlots = tonumber(args[4] or "1")
  nthreads = tonumber(args[5] or "1")
  counter = 0
  statuses = {}
end

request = function()
  counter = counter + 1
  -- unique per request across threads: interleave the threads' counters
  local n = offset + (counter - 1) * nthreads + tid
  if mode == "bare" then
    return wrk.format("POST", "/bench/bare/", {["Content-Type"] = "application/json"},
      string.format('{"n": %d}', n))
  end
  local lot = n % nlots
  local sample = math.floor(n / nlots) % 1000 + 1  -- the API takes samples 1..1000
  local body = string.format(
    '{"lot": "BENCH-%04d", "quantity": "hole_wall_copper", "value": %.2f, "unit": "um", "sample_index": %d}',
    lot, 24.0 + (n % 7) * 0.1, sample)
  return wrk.format("POST", "/api/v1/readings/", {
    ["Content-Type"] = "application/json",
    ["Authorization"] = "Token " .. token,
    ["Idempotency-Key"] = string.format("bench-%d", n),
  }, body)
end

response = function(status, headers, body)
  statuses[status] = (statuses[status] or 0) + 1
end

done = function(summary, latency, requests)
  local codes = {}
  for _, t in ipairs(threads) do
    local s = t:get("statuses")
    if s then for k, v in pairs(s) do codes[k] = (codes[k] or 0) + v end end
  end
  local parts = {}
  for k, v in pairs(codes) do table.insert(parts, string.format('"%d": %d', k, v)) end
  io.write(string.format(
    'WRKJSON {"requests": %d, "seconds": %.3f, "rps": %.1f, "p50_ms": %.2f, "p95_ms": %.2f, "p99_ms": %.2f, "errors": %d, "statuses": {%s}}\n',
    summary.requests, summary.duration / 1e6, summary.requests / (summary.duration / 1e6),
    latency:percentile(50) / 1000, latency:percentile(95) / 1000, latency:percentile(99) / 1000,
    summary.errors.connect + summary.errors.read + summary.errors.write + summary.errors.status
      + summary.errors.timeout,
    table.concat(parts, ", ")))
end
