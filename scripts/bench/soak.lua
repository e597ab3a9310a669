-- Mixed traffic at a bounded rate for the soak: each connection waits BENCH_DELAY_MS between its requests and
-- cycles through lane hits (exact, semantic, streamed), lane misses (a question no one asked before: a fresh
-- dock number is a different anchor, so it can hit neither exactly nor semantically), passthrough JSON and
-- passthrough SSE. Bodies come from the environment (scripts/bench.sh) so the soak asks what the benchmark asks.
local delay_ms = tonumber(os.getenv("BENCH_DELAY_MS") or "100")
local hit_body = os.getenv("BENCH_HIT_BODY")
local paraphrase_body = os.getenv("BENCH_PARAPHRASE_BODY")
local stream_hit_body = os.getenv("BENCH_STREAM_HIT_BODY")
local passthrough_body = os.getenv("BENCH_PASSTHROUGH_BODY")
local miss_template = os.getenv("BENCH_MISS_TEMPLATE") -- contains %d
local lane_path = os.getenv("BENCH_LANE_PATH")

local threads = {}
local counter = 0

function setup(thread)
  thread:set("tid", #threads + 1)
  table.insert(threads, thread)
end

local function headers(extra)
  local h = { ["Content-Type"] = "application/json", ["Authorization"] = "Bearer sk-bench-tenant" }
  if extra then for k, v in pairs(extra) do h[k] = v end end
  return h
end

function request()
  counter = counter + 1
  local kind = counter % 6
  if kind == 0 then
    return wrk.format("POST", lane_path, headers(), hit_body)
  elseif kind == 1 then
    -- tid * 10^7 + counter: unique across threads and across the whole run.
    local n = tid * 10000000 + counter
    return wrk.format("POST", lane_path, headers(), string.format(miss_template, n))
  elseif kind == 2 then
    return wrk.format("POST", "/v1/chat/completions", headers(), passthrough_body)
  elseif kind == 3 then
    return wrk.format("POST", lane_path, headers(), stream_hit_body)
  elseif kind == 4 then
    return wrk.format("POST", "/v1/chat/completions", headers({ ["X-Bench-Stream"] = "1" }), passthrough_body)
  else
    return wrk.format("POST", lane_path, headers(), paraphrase_body)
  end
end

function delay()
  return delay_ms
end
