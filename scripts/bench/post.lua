-- One fixed POST, repeated: method, body and headers from the environment (set by scripts/bench.sh).
--   BENCH_BODY   the JSON body
--   BENCH_HEADER optional extra "Name: value" header
wrk.method = "POST"
wrk.body = os.getenv("BENCH_BODY")
wrk.headers["Content-Type"] = "application/json"
-- A credential, as every real client sends: the partition of lane entries is derived from it.
wrk.headers["Authorization"] = "Bearer sk-bench-tenant"
local extra = os.getenv("BENCH_HEADER")
if extra and #extra > 0 then
  local name, value = extra:match("^([^:]+):%s*(.*)$")
  wrk.headers[name] = value
end
