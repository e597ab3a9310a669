#!/usr/bin/env bash
# Loopback benchmarks of the Release proxy (not run in CI). Every process it starts is recorded by PID and ended by PID.
# One command per subject, and `all` for every subject in one run followed by the ratios against issue #16's targets:
#
#   scripts/bench.sh all            fanout + hits + passthrough, then one table of ratios and verdicts
#   scripts/bench.sh fanout         N new SSE streams at once (upstream: 50 events 20 ms apart) direct, through nginx,
#                                   through RewriteProxy and through a bare Kestrel+YARP forwarder (the stack's floor):
#                                   CPU time of the middle process (/proc), TTFB, gaps between
#                                   events, arrival lag; then the proxy's resident memory (VmRSS) with the model loaded
#   scripts/bench.sh rss            the same run, one round: the resident-memory figure
#   scripts/bench.sh hits           exact and semantic hit latency of the proxy process against the bare model run
#   scripts/bench.sh passthrough    small JSON passthrough with wrk: direct, nginx, RewriteProxy, bare Kestrel+YARP
#   scripts/bench.sh stores         the hits subject with the SQLite store (proxy) and the PostgreSQL store (proxyB, on a
#                                   throwaway cluster of Debian's postgresql started here as the postgres user) in one run
#   scripts/bench.sh lanes          wrk throughput of exact and semantic hits, and the request-log A/B
#   scripts/bench.sh soak [min]     mixed traffic at a bounded rate for min minutes (default 10); VmRSS sampled every
#                                   10 s; exits 1 when it grows more than 5 % after the 2-minute warm-up
#   scripts/bench.sh restart [n]    time to the first semantic hit after a restart with n entries in one scope (default
#                                   100000), with an index snapshot and with a rebuild (scripts/bench/restart.sh)
#
# Knobs (environment):
#   BENCH_ROUNDS (3)           measured rounds per target; targets take turns within a round, ratios use the median
#   BENCH_STREAMS (300)        fan-out streams per round
#   BENCH_FANOUT_WARMUP (5)    fan-out warm-up rounds per target, printed but not counted: the proxy's first rounds
#                              after start cost ~2x the CPU of later ones (JIT tiering; see docs/measurements)
#   BENCH_FANOUT_PIN (0)       1: pin the fan-out's middle process to core 0 (default: every process sees both cores,
#                              as the proxy would in production; the embedder then loads as it ships)
#   BENCH_IDLE_S (8)           fanout: seconds idle after the last round before VmRSS is read again (the proxy's idle
#                              trim comes 5-6 s after the last request, Limits:IdleTrimAfter)
#   BENCH_PIN (1)              wrk runs: the process under test alone on core 0, wrk + upstream on core 1
#   BENCH_DURATION (10s), BENCH_WARMUP (3s, unrecorded), BENCH_CONNECTIONS (16)   wrk runs
#   BENCH_PROXY_ARGS, BENCH_PROXY_ENV   extra arguments / VAR=value words for every RewriteProxy started (A/B runs)
#   BENCH_B_ARGS, BENCH_B_ENV, BENCH_B_BIN   fanout and hits: also start a second RewriteProxy with these arguments,
#                              environment or binary (e.g. a build of the previous commit), measured as "proxyB" in the
#                              same rounds: an A/B in one run (only the ratios of one run are compared)
#   BENCH_HIT_CALLS (300), BENCH_HIT_BLOCKS (5)   hits: sequential calls per case and block
#   BENCH_WARMUP_S (120), BENCH_SAMPLE_S (10), BENCH_SOAK_CONNECTIONS (4), BENCH_DELAY_MS (100), BENCH_MAX_RSS_GROWTH (5)
# Why these: 300 streams is the issue's load; 3 rounds is the least that shows the spread; 16 connections is the
# issue's wrk load; 2 wrk threads = this machine's 2 cores (wrk's own advice: threads no more than cores).
set -euo pipefail
cd "$(dirname "$0")/.."
root=$(pwd)

mode=${1:-all}
soak_minutes=${2:-10}
restart_entries=${2:-100000}
duration=${BENCH_DURATION:-10s}
warmup=${BENCH_WARMUP:-3s}
connections=${BENCH_CONNECTIONS:-16}
rounds=${BENCH_ROUNDS:-3}
streams=${BENCH_STREAMS:-300}
threads=2
pin=${BENCH_PIN:-1}
upstream_port=${BENCH_UPSTREAM_PORT:-18091}
nginx_port=${BENCH_NGINX_PORT:-18092}
proxy_port=${BENCH_PROXY_PORT:-18093}
forwarder_port=${BENCH_FORWARDER_PORT:-18094}
sse_port=${BENCH_SSE_PORT:-18095}
read -r -a proxy_args <<< "${BENCH_PROXY_ARGS:-}"
read -r -a proxy_env <<< "${BENCH_PROXY_ENV:-}"
case "$mode" in all|fanout|rss|hits|stores|passthrough|lanes|soak|restart) ;; *)
  echo "usage: scripts/bench.sh [all | fanout | rss | hits | stores | passthrough | lanes | soak [minutes] | restart [entries]]" >&2; exit 2 ;; esac

# ---- what it needs ------------------------------------------------------------------------------------------------
need=()
command -v wrk     >/dev/null 2>&1 || need+=(wrk)
command -v nginx   >/dev/null 2>&1 || [ -x /usr/sbin/nginx ] || need+=(nginx)
command -v taskset >/dev/null 2>&1 || need+=(util-linux)
command -v curl    >/dev/null 2>&1 || need+=(curl)
if [ ${#need[@]} -gt 0 ]; then
  echo "bench.sh: installing ${need[*]}"
  export DEBIAN_FRONTEND=noninteractive
  sudo_cmd=""; [ "$(id -u)" -ne 0 ] && sudo_cmd="sudo"
  $sudo_cmd apt-get update -qq
  $sudo_cmd apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null
fi
nginx_bin=$(command -v nginx || echo /usr/sbin/nginx)

export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1
echo "bench.sh: building Release"
dotnet build proxy/RewriteProxy.csproj -c Release -v q -nologo >/dev/null
proxy_bin="$root/proxy/bin/Release/net10.0/rewriteproxy"
case "$mode" in all|fanout|rss|passthrough|lanes) dotnet build scripts/bench/forwarder/Forwarder.csproj -c Release -v q -nologo >/dev/null ;; esac
case "$mode" in all|fanout|rss) dotnet build scripts/bench/fanout/Fanout.csproj -c Release -v q -nologo >/dev/null ;; esac
case "$mode" in all|hits|stores|restart) dotnet build tests/RewriteProxy.Benchmarks/RewriteProxy.Benchmarks.csproj -c Release -v q -nologo >/dev/null ;; esac
forwarder_bin="$root/scripts/bench/forwarder/bin/Release/net10.0/Forwarder"
fanout_bin="$root/scripts/bench/fanout/bin/Release/net10.0/fanout"
hits_dll="$root/tests/RewriteProxy.Benchmarks/bin/Release/net10.0/RewriteProxy.Benchmarks.dll"

# ---- processes, by PID ----------------------------------------------------------------------------------------------
work=$(mktemp -d /tmp/rewriteproxy-bench.XXXXXX)
chmod 755 "$work"
pids=()
stop_pid() {
  local pid=$1
  kill -TERM "$pid" 2>/dev/null || return 0
  for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
  kill -KILL "$pid" 2>/dev/null || true
  wait "$pid" 2>/dev/null || true
}
cleanup() {
  for pid in "${pids[@]}"; do stop_pid "$pid"; done
  if declare -F pg_stop >/dev/null; then pg_stop; fi
  [ "${BENCH_KEEP:-0}" = 1 ] && echo "bench.sh: kept $work" || rm -rf "$work"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

# Pinning: the process under test (RewriteProxy or nginx as a proxy) gets core 0 to itself; wrk and the upstream share
# core 1. Without it, wrk, the upstream and the proxy fight over two cores and the winner decides the result.
on_sut=(); on_harness=()
if [ "$pin" = 1 ] && [ "$(nproc)" -ge 2 ]; then on_sut=(taskset -c 0); on_harness=(taskset -c 1); fi

loadavg() { cut -d' ' -f1-3 /proc/loadavg; }

wait_http() { # url tries
  for _ in $(seq "${2:-200}"); do curl -fsS -o /dev/null "$1" 2>/dev/null && return 0; sleep 0.1; done
  echo "bench.sh: $1 did not come up" >&2; return 1
}

# ---- the scripted upstream and its fixed answers -----------------------------------------------------------------
question="How long can I keep a shared bike before the overtime fee starts?"
paraphrase="How long may I keep a shared bike before the overtime fee begins?"
# The fixed draft answers the benchmark question (invented scenario), so the drift guard accepts it and stores it.
draft="Riverton bike-share rides are free for the first thirty minutes on an annual plan. After that an overtime fee starts and is charged for every further fifteen minutes you keep the bike, until it is docked again."
completion_json=$(jq -cn --arg c "$draft" '{id:"chatcmpl-bench",object:"chat.completion",created:1767225600,model:"bench-model",
  choices:[{index:0,message:{role:"assistant",content:$c},finish_reason:"stop"}],usage:{prompt_tokens:24,completion_tokens:44,total_tokens:68}}')
sse_text=""
for piece in "Riverton" " bike-share" " rides" " are" " free" " for" " thirty" " minutes."; do
  sse_text+="data: $(jq -cn --arg p "$piece" '{id:"chatcmpl-bench",object:"chat.completion.chunk",created:1767225600,model:"bench-model",choices:[{index:0,delta:{content:$p},finish_reason:null}]}')\n\n"
done
sse_text+='data: {"id":"chatcmpl-bench","object":"chat.completion.chunk","created":1767225600,"model":"bench-model","choices":[{"index":0,"delta":{},"finish_reason":"stop"}]}\n\ndata: [DONE]\n\n'

fill() { # template output [upstream-port] [nginx-workers]
  local esc_json esc_sse up=${3:-$upstream_port} workers=${4:-1}
  esc_json=$(printf '%s' "$completion_json" | sed -e 's/[\\&|]/\\&/g')
  esc_sse=$(printf '%s' "$sse_text" | sed -e 's/[\\&|]/\\&/g')
  sed -e "s|@DIR@|$work|g" -e "s|@UPSTREAM_PORT@|$up|g" -e "s|@NGINX_PORT@|$nginx_port|g" -e "s|@WORKERS@|$workers|g" \
      -e "s|@JSON@|$esc_json|" -e "s|@SSE@|$esc_sse|" "$1" > "$2"
}

chat_body() { # question [stream]
  jq -cn --arg q "$1" --argjson s "${2:-false}" '{model:"bench-model",temperature:0,stream:$s,
    messages:[{role:"system",content:"Write a short passage that answers the question."},{role:"user",content:$q}]}'
}

start_upstream() {
  fill scripts/bench/upstream.nginx.conf "$work/upstream.conf"
  "${on_harness[@]}" "$nginx_bin" -p "$work" -c "$work/upstream.conf" -e "$work/upstream-error.log" 2>>"$work/upstream-error.log" &
  upstream_pid=$!; pids+=($upstream_pid)
  wait_http "http://127.0.0.1:$upstream_port/v1/models"
}

start_nginx_proxy() { # [upstream-port] [workers] [pin-prefix...]: nginx as a plain reverse proxy on nginx_port
  local up=${1:-$upstream_port} workers=${2:-1}
  shift 2 2>/dev/null || shift $#
  local pin_cmd=("$@"); [ $# -eq 0 ] && pin_cmd=("${on_sut[@]}")
  fill scripts/bench/proxy.nginx.conf "$work/proxy.conf" "$up" "$workers"
  "${pin_cmd[@]}" "$nginx_bin" -p "$work" -c "$work/proxy.conf" -e "$work/proxy-error.log" 2>>"$work/proxy-error.log" &
  nginx_pid=$!; pids+=($nginx_pid)
  wait_http "http://127.0.0.1:$nginx_port/v1/models"
}

start_forwarder() {
  "${on_sut[@]}" "$forwarder_bin" "http://127.0.0.1:$forwarder_port" "http://127.0.0.1:$upstream_port" >"$work/forwarder.log" 2>&1 &
  forwarder_pid=$!; pids+=($forwarder_pid)
  wait_http "http://127.0.0.1:$forwarder_port/v1/models" 600
}

proxy_pid=""
proxy_up=""     # upstream port of the next start_proxy (default: the nginx upstream)
proxy_pin=()    # pin prefix of the next start_proxy (default: on_sut)
start_proxy() { # name extra-args...
  local name=$1; shift
  mkdir -p "$work/$name"
  # proxy_pin=(env) starts it unpinned: env with no assignments just runs the command.
  local pin_cmd=("${on_sut[@]}"); [ ${#proxy_pin[@]} -gt 0 ] && pin_cmd=("${proxy_pin[@]}")
  # Started from the repository root, so it reads config/rewriteproxy.json (lanes draft and siblings) as shipped.
  env "${proxy_env[@]}" "${pin_cmd[@]}" "$proxy_bin" serve --urls "http://127.0.0.1:$proxy_port" \
    "--Upstream:BaseUrl=http://127.0.0.1:${proxy_up:-$upstream_port}/v1" "--Store:Path=$work/$name/cache.db" \
    "${proxy_args[@]}" "$@" >"$work/$name/proxy.log" 2>&1 &
  proxy_pid=$!; pids+=($proxy_pid)
  wait_http "http://127.0.0.1:$proxy_port/readyz" 600
}

stop_tracked() { # pid: ends it and forgets it, so the exit trap never signals a reused PID
  stop_pid "$1"
  local kept=() p
  for p in "${pids[@]}"; do [ "$p" != "$1" ] && kept+=("$p"); done
  pids=("${kept[@]}")
}

stop_proxy() { stop_tracked "$proxy_pid"; proxy_pid=""; }

b_pid=""; b_port=$((proxy_port + 10))
want_b() { [ -n "${BENCH_B_ARGS:-}${BENCH_B_ENV:-}${BENCH_B_BIN:-}" ]; }
start_b() { # name upstream-port pin-prefix-words... [-- extra serve args...]: starts "proxyB" (BENCH_B_*) for an A/B in one run
  local name=$1 up=$2; shift 2
  local pin=() extra=() b_args b_env
  while [ $# -gt 0 ] && [ "$1" != "--" ]; do pin+=("$1"); shift; done
  [ $# -gt 0 ] && { shift; extra=("$@"); }
  read -r -a b_args <<< "${BENCH_B_ARGS:-}"; read -r -a b_env <<< "${BENCH_B_ENV:-}"
  mkdir -p "$work/$name-b"
  env "${b_env[@]}" "${pin[@]}" "${BENCH_B_BIN:-$proxy_bin}" serve --urls "http://127.0.0.1:$b_port" \
    "--Upstream:BaseUrl=http://127.0.0.1:$up/v1" "--Store:Path=$work/$name-b/cache.db" "${extra[@]}" "${b_args[@]}" \
    >"$work/$name-b/proxy.log" 2>&1 &
  b_pid=$!; pids+=($b_pid)
  wait_http "http://127.0.0.1:$b_port/readyz" 600
  echo "  proxyB: env '${BENCH_B_ENV:-}' args '${BENCH_B_ARGS:-}' binary ${BENCH_B_BIN:-(same)}; VmRSS after start $(rss_mb "$b_pid") MB"
}

lane_call() { # body -> prints X-Rewrite-Cache
  curl -sS -o /dev/null -D - -H 'Content-Type: application/json' -H 'Authorization: Bearer sk-bench-tenant' \
    --data-binary "$1" "http://127.0.0.1:$proxy_port/lane/draft/v1/chat/completions" \
    | tr -d '\r' | awk -F': ' 'tolower($1)=="x-rewrite-cache"{print $2}'
}

expect_cache() { # body expected
  local got; got=$(lane_call "$1")
  if [ "$got" != "$2" ]; then echo "bench.sh: expected X-Rewrite-Cache: $2, got '$got'" >&2; exit 1; fi
}

# ---- wrk runs ------------------------------------------------------------------------------------------------------
to_ms() { # wrk latency like 245.00us | 1.23ms | 2.01s
  awk -v v="$1" 'BEGIN{ n=v+0; if (v ~ /us$/) n/=1000; else if (v ~ /ms$/) n=n; else if (v ~ /m$/) n*=60000; else if (v ~ /s$/) n*=1000; printf "%.3f", n }'
}

rows=()
declare -A rps p50 p90 p99
measure() { # name url body [header]
  local name=$1 url=$2 out="$work/wrk-$1.txt" before after
  # Unrecorded warm-up: the JIT tiers up and the connection pools fill before the measured run starts.
  BENCH_BODY=$3 BENCH_HEADER=${4:-} "${on_harness[@]}" wrk -t"$threads" -c"$connections" -d"$warmup" \
    -s scripts/bench/post.lua "$url" > "$work/warmup-$1.txt"
  before=$(loadavg)
  local cpu0=""; [ -n "$cpu_pid" ] && cpu0=$(cpu_ticks "$cpu_pid")
  BENCH_BODY=$3 BENCH_HEADER=${4:-} "${on_harness[@]}" wrk -t"$threads" -c"$connections" -d"$duration" --latency \
    -s scripts/bench/post.lua "$url" > "$out"
  after=$(loadavg)
  if grep -q -E 'Non-2xx|Socket errors' "$out"; then
    echo "bench.sh: $name had errors:" >&2; grep -E 'Non-2xx|Socket errors' "$out" >&2; exit 1
  fi
  rps[$name]=$(awk '/^Requests\/sec:/{print $2}' "$out")
  p50[$name]=$(to_ms "$(awk '$1=="50%"{print $2}' "$out")")
  p90[$name]=$(to_ms "$(awk '$1=="90%"{print $2}' "$out")")
  p99[$name]=$(to_ms "$(awk '$1=="99%"{print $2}' "$out")")
  rows+=("$name")
  printf '  %-34s %10s req/s  p50 %8s ms  p90 %8s ms  p99 %8s ms   load %s -> %s\n' \
    "$name" "${rps[$name]}" "${p50[$name]}" "${p90[$name]}" "${p99[$name]}" "$before" "$after"
  if [ -n "$cpu0" ]; then # CPU time of the process under test (utime + stime, /proc/<pid>/stat) per request served
    local requests; requests=$(awk '/requests in/{print $1}' "$out")
    awk -v t="$(( $(cpu_ticks "$cpu_pid") - cpu0 ))" -v hz="$(getconf CLK_TCK)" -v n="$requests" -v name="$name" \
      'BEGIN{ printf "  %-34s CPU of the proxy %.3f ms per request (%d requests)\n", name, t * 1000 / hz / n, n }'
  fi
}

cpu_pid=""      # set for one call (cpu_pid=$pid measure ...): measure() also prints that process's CPU time per request
cpu_ticks() { awk '{print $14 + $15}' "/proc/$1/stat"; }

ratio() { awk -v a="$1" -v b="$2" 'BEGIN{ printf "%.2f", a/b }'; }
minus() { awk -v a="$1" -v b="$2" 'BEGIN{ printf "%+.3f", a-b }'; }
verdict() { awk -v v="$1" -v op="$2" -v t="$3" 'BEGIN{ ok = (op=="<=") ? (v<=t) : (v>=t); print ok ? "met" : "NOT met" }'; }

machine() {
  echo "machine: $(nproc) cores, $(awk -F': ' '/model name/{print $2; exit}' /proc/cpuinfo), $(date -u +%Y-%m-%dT%H:%MZ), load $(loadavg)"
}

wrk_settings() {
  echo "wrk: ${threads} threads, ${connections} connections, ${duration} after ${warmup} unrecorded; pinning: $([ ${#on_sut[@]} -gt 0 ] && echo 'under test on core 0, wrk + upstream on core 1' || echo off)"
}

run_lanes() {
  local json_body stream_body
  json_body=$(chat_body "$question")
  stream_body=$(chat_body "$question" true)
  machine; wrk_settings
  start_upstream
  start_nginx_proxy "$upstream_port" 1
  echo "passthrough (POST /v1/chat/completions, $(printf '%s' "$json_body" | wc -c)-byte body; JSON $(printf '%s' "$completion_json" | wc -c) bytes back):"
  measure direct-json      "http://127.0.0.1:$upstream_port/v1/chat/completions" "$json_body"
  start_proxy passthrough
  measure proxy-json       "http://127.0.0.1:$proxy_port/v1/chat/completions"    "$json_body"
  measure nginx-json       "http://127.0.0.1:$nginx_port/v1/chat/completions"    "$json_body"
  # A/B floor: Kestrel + YARP alone (scripts/bench/forwarder), started only while it is measured.
  start_forwarder
  measure bare-yarp-json   "http://127.0.0.1:$forwarder_port/v1/chat/completions" "$json_body"
  stop_tracked "$forwarder_pid"
  measure direct-sse       "http://127.0.0.1:$upstream_port/v1/chat/completions" "$stream_body" "X-Bench-Stream: 1"
  measure proxy-sse        "http://127.0.0.1:$proxy_port/v1/chat/completions"    "$stream_body" "X-Bench-Stream: 1"
  measure nginx-sse        "http://127.0.0.1:$nginx_port/v1/chat/completions"    "$stream_body" "X-Bench-Stream: 1"

  echo "lane hits (POST /lane/draft/v1/chat/completions):"
  expect_cache "$json_body" miss
  expect_cache "$json_body" hit-exact
  cpu_pid=$proxy_pid measure exact-hit "http://127.0.0.1:$proxy_port/lane/draft/v1/chat/completions" "$json_body"
  stop_proxy

  # A/B: the same passthrough with a log line for every request (RequestLog at Debug; by default a successful
  # passthrough call is not logged at Information, since the line cost about a third of the throughput).
  start_proxy request-log-debug --Logging:LogLevel:RewriteProxy.Hosting.RequestLog=Debug
  measure proxy-json-logged "http://127.0.0.1:$proxy_port/v1/chat/completions" "$json_body"
  stop_proxy

  # Embedding:CacheSize=0: otherwise the paraphrase's vector is cached after the first call and every later call
  # would skip the model; with 0 each semantic hit runs the model once, as a new paraphrase does.
  start_proxy semantic --Embedding:CacheSize=0
  local para_body; para_body=$(chat_body "$paraphrase")
  expect_cache "$json_body" miss
  expect_cache "$para_body" hit-semantic
  cpu_pid=$proxy_pid measure semantic-hit "http://127.0.0.1:$proxy_port/lane/draft/v1/chat/completions" "$para_body"
  stop_proxy

  echo
  echo "| run | req/s | p50 ms | p90 ms | p99 ms |"
  echo "| --- | ---: | ---: | ---: | ---: |"
  for r in "${rows[@]}"; do echo "| $r | ${rps[$r]} | ${p50[$r]} | ${p90[$r]} | ${p99[$r]} |"; done
  echo
  echo "| ratio | JSON | SSE | target |"
  echo "| --- | ---: | ---: | --- |"
  echo "| proxy / direct (req/s) | $(ratio "${rps[proxy-json]}" "${rps[direct-json]}") | $(ratio "${rps[proxy-sse]}" "${rps[direct-sse]}") | |"
  echo "| proxy / nginx (req/s) | $(ratio "${rps[proxy-json]}" "${rps[nginx-json]}") | $(ratio "${rps[proxy-sse]}" "${rps[nginx-sse]}") | ≥ 1.00: $(verdict "$(ratio "${rps[proxy-json]}" "${rps[nginx-json]}")" '>=' 1) (JSON) |"
  echo "| proxy p50 − direct p50 (ms) | $(minus "${p50[proxy-json]}" "${p50[direct-json]}") | $(minus "${p50[proxy-sse]}" "${p50[direct-sse]}") | ≤ 0.5: $(verdict "$(minus "${p50[proxy-json]}" "${p50[direct-json]}")" '<=' 0.5) (JSON) |"
  echo "| nginx p50 − direct p50 (ms) | $(minus "${p50[nginx-json]}" "${p50[direct-json]}") | $(minus "${p50[nginx-sse]}" "${p50[direct-sse]}") | |"
  echo "| proxy with a log line per request / as shipped (req/s) | $(ratio "${rps[proxy-json-logged]}" "${rps[proxy-json]}") | | |"
  echo "| proxy / bare Kestrel+YARP (req/s) | $(ratio "${rps[proxy-json]}" "${rps[bare-yarp-json]}") | | |"
  echo "| bare Kestrel+YARP / nginx (req/s) | $(ratio "${rps[bare-yarp-json]}" "${rps[nginx-json]}") | | |"
  echo "| exact hit / passthrough (req/s) | $(ratio "${rps[exact-hit]}" "${rps[proxy-json]}") | | |"
  echo "| semantic hit / exact hit (req/s) | $(ratio "${rps[semantic-hit]}" "${rps[exact-hit]}") | | |"
}

# ---- soak ----------------------------------------------------------------------------------------------------------
rss_kb() { awk '/^VmRSS:/{print $2}' "/proc/$1/status"; }

run_soak() {
  local minutes=$1 warmup_s=${BENCH_WARMUP_S:-120} every=${BENCH_SAMPLE_S:-10} max_growth=${BENCH_MAX_RSS_GROWTH:-5}
  local seconds=$((minutes * 60))
  if [ "$seconds" -le $((warmup_s + 3 * every)) ]; then echo "bench.sh: soak needs more than warm-up + 3 samples" >&2; exit 2; fi
  machine
  start_upstream
  # Bounded structures are made small so that they fill during the warm-up and what follows is the steady state:
  # 500 entries (misses then evict the least recently hit) and 256 cached vectors (default 4096 would still be
  # filling at 10 minutes at this miss rate).
  start_proxy soak --Store:MaxEntries=500 --Embedding:CacheSize=256
  local hit_body stream_hit_body para_body
  hit_body=$(chat_body "$question"); stream_hit_body=$(chat_body "$question" true); para_body=$(chat_body "$paraphrase")
  expect_cache "$hit_body" miss
  expect_cache "$para_body" hit-semantic
  local delay=${BENCH_DELAY_MS:-100} conns=${BENCH_SOAK_CONNECTIONS:-4}
  echo "soak: ${minutes} min (warm-up ${warmup_s} s, VmRSS every ${every} s), pinning $([ ${#on_sut[@]} -gt 0 ] && echo 'proxy on core 0, wrk + upstream on core 1' || echo off), ${conns} connections each waiting ${delay} ms between requests; mix per 6 calls: exact hit, miss, passthrough JSON, streamed hit, passthrough SSE, semantic hit"
  local before; before=$(loadavg)
  BENCH_DELAY_MS=$delay BENCH_LANE_PATH=/lane/draft/v1/chat/completions \
  BENCH_HIT_BODY=$hit_body BENCH_STREAM_HIT_BODY=$stream_hit_body BENCH_PARAPHRASE_BODY=$para_body \
  BENCH_PASSTHROUGH_BODY=$hit_body \
  BENCH_MISS_TEMPLATE=$(chat_body "How long can I keep a shared bike from dock %d before the overtime fee starts?") \
    "${on_harness[@]}" wrk -t2 -c"$conns" -d"${seconds}s" --latency -s scripts/bench/soak.lua "http://127.0.0.1:$proxy_port" \
    > "$work/wrk-soak.txt" &
  local wrk_pid=$!; pids+=($wrk_pid)
  local t=0 samples=() times=()
  while kill -0 "$wrk_pid" 2>/dev/null && [ $t -lt $seconds ]; do
    sleep "$every"; t=$((t + every))
    kill -0 "$proxy_pid" 2>/dev/null || { echo "bench.sh: the proxy died; see $work/soak/proxy.log" >&2; BENCH_KEEP=1; exit 1; }
    local kb; kb=$(rss_kb "$proxy_pid"); samples+=("$kb"); times+=("$t")
    printf '  t=%4ss  VmRSS %7.1f MiB\n' "$t" "$(awk -v k="$kb" 'BEGIN{print k/1024}')"
  done
  wait "$wrk_pid" || true
  local after; after=$(loadavg)
  local entries; entries=$(curl -sS "http://127.0.0.1:$proxy_port/metrics" | awk '/^rewriteproxy_entries/{print $0}' | head -3)
  echo "load $before -> $after"
  sed -n '/Latency Distribution/,$p' "$work/wrk-soak.txt"
  [ -n "$entries" ] && echo "$entries"
  # Growth: the mean of the last 3 samples against the mean of the first 3 after the warm-up (one sample is one GC's luck).
  local post=()
  for i in "${!times[@]}"; do [ "${times[$i]}" -gt "$warmup_s" ] && post+=("${samples[$i]}"); done
  if [ ${#post[@]} -lt 3 ]; then echo "bench.sh: too few samples after warm-up" >&2; exit 1; fi
  local n=${#post[@]}
  local base=$(( (post[0] + post[1] + post[2]) / 3 )) last=$(( (post[n-1] + post[n-2] + post[n-3]) / 3 ))
  local growth; growth=$(awk -v a="$last" -v b="$base" 'BEGIN{printf "%.2f", (a-b)*100/b}')
  echo "VmRSS after warm-up: $((base / 1024)) MiB -> $((last / 1024)) MiB = ${growth} % (limit ${max_growth} %)"
  if grep -q -E 'Socket errors|Non-2xx' "$work/wrk-soak.txt"; then
    echo "bench.sh: soak had failed calls:" >&2; grep -E 'Socket errors|Non-2xx' "$work/wrk-soak.txt" >&2; exit 1
  fi
  awk -v g="$growth" -v m="$max_growth" 'BEGIN{ exit !(g <= m) }' || { echo "bench.sh: VmRSS grew ${growth} % > ${max_growth} %" >&2; exit 1; }
  echo "soak: ok"
}

# ---- stream fan-out and resident memory -------------------------------------------------------------------------------
declare -A fig   # figures for the closing table: name -> value

median() { sort -g | awk '{v[NR]=$1} END{ if (NR==0) print "nan"; else if (NR%2) print v[(NR+1)/2]; else printf "%.4f\n", (v[NR/2]+v[NR/2+1])/2 }'; }
per_round() { # json jq-expression-over-round-r -> one value per round
  local json=$1 expr=$2 r n
  n=$(jq '[.[].Round] | max' "$json")
  for r in $(seq 1 "$n"); do jq -r --argjson r "$r" "map(select(.Round==\$r)) | INDEX(.Target) | $expr" "$json"; done
}
rss_mb() { awk '/^VmRSS:/{printf "%.0f", $2/1024}' "/proc/$1/status"; }
mem_detail() { # pid: what the resident memory is made of
  awk '/^(Rss|Anonymous|Shared_Clean|Private_Clean|Private_Dirty):/{printf "%s %.0f MB  ", $1, $2/1024}' "/proc/$1/smaps_rollup"; echo
}

run_fanout() { # rounds
  local n_rounds=${1:-$rounds} fan_sut=(env) fan_harness=(env) workers fan_warmup=${BENCH_FANOUT_WARMUP:-5}
  workers=$(nproc)
  if [ "${BENCH_FANOUT_PIN:-0}" = 1 ] && [ "$(nproc)" -ge 2 ]; then fan_sut=(taskset -c 0); fan_harness=(taskset -c 1); workers=1; fi
  echo "== fanout: $streams new streams at once, upstream sends 50 SSE events 20 ms apart; pinning: $([ "${fan_sut[0]}" = env ] && echo "off (every process sees $(nproc) cores; nginx $workers workers)" || echo 'middle on core 0, upstream + client on core 1')"
  machine
  "${fan_harness[@]}" "$fanout_bin" upstream "http://127.0.0.1:$sse_port" 50 20 >"$work/sse-upstream.log" 2>&1 &
  local sse_pid=$!; pids+=($sse_pid)
  wait_http "http://127.0.0.1:$sse_port/v1/models"
  start_nginx_proxy "$sse_port" "$workers" "${fan_sut[@]}"
  proxy_up=$sse_port; proxy_pin=("${fan_sut[@]}")
  start_proxy fanout
  proxy_up=""; proxy_pin=()
  # The floor of any Kestrel + YARP proxy: the bare forwarder (same client settings, nothing else) on the same upstream.
  "${fan_sut[@]}" "$forwarder_bin" "http://127.0.0.1:$forwarder_port" "http://127.0.0.1:$sse_port" >"$work/forwarder.log" 2>&1 &
  forwarder_pid=$!; pids+=($forwarder_pid)
  wait_http "http://127.0.0.1:$forwarder_port/v1/models" 600
  local rss_start yarp_start; rss_start=$(rss_mb "$proxy_pid"); yarp_start=$(rss_mb "$forwarder_pid")
  local b_target=(); b_pid=""
  if want_b; then
    start_b fanout "$sse_port" "${fan_sut[@]}"
    b_target=(--target "proxyB=http://127.0.0.1:$b_port/v1/chat/completions,pid=$b_pid")
  fi
  local json="$work/fanout.json" before after
  before=$(loadavg)
  "${fan_harness[@]}" "$fanout_bin" run --streams "$streams" --rounds "$n_rounds" --warmup-rounds "$fan_warmup" --json "$json" \
    --target "direct=http://127.0.0.1:$sse_port/v1/chat/completions" \
    --target "nginx=http://127.0.0.1:$nginx_port/v1/chat/completions,pid=$nginx_pid" \
    --target "proxy=http://127.0.0.1:$proxy_port/v1/chat/completions,pid=$proxy_pid" \
    --target "yarp=http://127.0.0.1:$forwarder_port/v1/chat/completions,pid=$forwarder_pid" "${b_target[@]}"
  after=$(loadavg)
  local rss_end yarp_end rss_idle; rss_end=$(rss_mb "$proxy_pid"); yarp_end=$(rss_mb "$forwarder_pid")
  echo "  proxy VmRSS: $rss_start MB after start (model loaded), $rss_end MB right after the fan-out; nginx (all processes): $(jq '[.[] | select(.Target=="nginx") | .RssMb] | max | floor' "$json") MB"
  echo "  proxy memory after the fan-out: $(mem_detail "$proxy_pid")"
  echo "  bare Kestrel+YARP VmRSS: $yarp_start MB after start, $yarp_end MB after the fan-out (the stack's own growth)"
  # The proxy gives back what the burst left committed once idle for Limits:IdleTrimAfter (5 s; checked every second).
  sleep "${BENCH_IDLE_S:-8}"
  rss_idle=$(rss_mb "$proxy_pid")
  echo "  proxy VmRSS ${BENCH_IDLE_S:-8} s after the fan-out: $rss_idle MB; $(grep -o 'memory given back.*' "$work/fanout/proxy.log" | tail -1)"
  echo "  load $before -> $after"
  if [ -n "$b_pid" ]; then
    echo "  proxyB VmRSS after the fan-out: $(rss_mb "$b_pid") MB; $(mem_detail "$b_pid")"
    echo "  per round, proxyB CPU / proxy CPU: $(per_round "$json" '.proxyB.CpuMs / .proxy.CpuMs' | awk '{printf "%.2f ", $1}')"
    echo "  per round, added TTFB p99 (ms) proxyB: $(per_round "$json" '.proxyB.TtfbP99 - .direct.TtfbP99' | awk '{printf "%+.1f ", $1}')"
    stop_tracked "$b_pid"
  fi
  stop_proxy; stop_tracked "$forwarder_pid"; stop_tracked "$nginx_pid"; stop_tracked "$sse_pid"

  # Per round (targets measured back to back), then the median over rounds.
  fig[fanout_cpu_ratio]=$(per_round "$json" '.proxy.CpuMs / .nginx.CpuMs' | median)
  fig[fanout_cpu_proxy]=$(per_round "$json" '.proxy.CpuMs' | median)
  fig[fanout_cpu_nginx]=$(per_round "$json" '.nginx.CpuMs' | median)
  fig[fanout_cpu_yarp_ratio]=$(per_round "$json" '.yarp.CpuMs / .nginx.CpuMs' | median)
  fig[fanout_ttfb_added_yarp]=$(per_round "$json" '.yarp.TtfbP99 - .direct.TtfbP99' | median)
  fig[fanout_ttfb_added_proxy]=$(per_round "$json" '.proxy.TtfbP99 - .direct.TtfbP99' | median)
  fig[fanout_ttfb_added_nginx]=$(per_round "$json" '.nginx.TtfbP99 - .direct.TtfbP99' | median)
  fig[fanout_gap_added_proxy]=$(per_round "$json" '.proxy.GapP99 - .direct.GapP99' | median)
  fig[fanout_gap_added_nginx]=$(per_round "$json" '.nginx.GapP99 - .direct.GapP99' | median)
  fig[fanout_lag_added_proxy]=$(per_round "$json" '.proxy.LagP99 - .direct.LagP99' | median)
  fig[fanout_lag_added_nginx]=$(per_round "$json" '.nginx.LagP99 - .direct.LagP99' | median)
  fig[rss_start]=$rss_start
  fig[rss_end]=$rss_end
  fig[rss_idle]=$rss_idle
  fig[rss_yarp_growth]=$((yarp_end - yarp_start))
  echo "  per round, proxy CPU / nginx CPU: $(per_round "$json" '.proxy.CpuMs / .nginx.CpuMs' | awk '{printf "%.2f ", $1}')  bare YARP CPU / nginx CPU: $(per_round "$json" '.yarp.CpuMs / .nginx.CpuMs' | awk '{printf "%.2f ", $1}')"
  echo "  per round, added TTFB p99 (ms) proxy: $(per_round "$json" '.proxy.TtfbP99 - .direct.TtfbP99' | awk '{printf "%+.1f ", $1}')  nginx: $(per_round "$json" '.nginx.TtfbP99 - .direct.TtfbP99' | awk '{printf "%+.1f ", $1}')"
}

# ---- hit latency against the bare model run ---------------------------------------------------------------------------
run_hits() {
  # Not pinned: the bare run and the proxy's embedder both use every core, as the target compares them.
  local on_sut=() on_harness=()
  echo "== hits: sequential lane calls on one connection against the bare model run (same question, same session settings)"
  machine
  start_upstream
  proxy_pin=(env)
  # CacheSize=0: each semantic hit runs the model, as a new paraphrase does (otherwise its vector comes from memory).
  start_proxy hits --Embedding:CacheSize=0
  proxy_pin=()
  local json="$work/hits.json" b_url=(); b_pid=""
  if want_b; then
    start_b hits "$upstream_port" env -- --Embedding:CacheSize=0
    b_url=(--b-url "http://127.0.0.1:$b_port")
  fi
  dotnet "$hits_dll" hit-latency --url "http://127.0.0.1:$proxy_port" "${b_url[@]}" --calls "${BENCH_HIT_CALLS:-300}" \
    --blocks "${BENCH_HIT_BLOCKS:-5}" --json "$json"
  # The model run as the proxy itself timed it while serving (rewriteproxy_embed_duration_seconds), to set beside the
  # bench process's bare runs: what a served semantic hit spends in the model, and what around it.
  local embed; embed=$(curl -sf "http://127.0.0.1:$proxy_port/metrics" | awk '/^rewriteproxy_embed_duration_seconds_sum/{s=$2} /^rewriteproxy_embed_duration_seconds_count/{n=$2} END{ if (n>0) printf "%.3f %d", s*1000/n, n }')
  fig[hit_embed_mean]=${embed% *}
  echo "  model run inside the proxy while serving: mean ${embed% *} ms over ${embed#* } runs (rewriteproxy_embed_duration_seconds)"
  [ -n "$b_pid" ] && stop_tracked "$b_pid"
  stop_proxy; stop_tracked "$upstream_pid"
  fig[hit_semantic_p50]=$(jq '."semantic-hit".p50' "$json")
  fig[hit_exact_p50]=$(jq '."exact-hit".p50' "$json")
  fig[hit_bare2_p50]=$(jq '."bare-2-threads".p50' "$json")
  fig[hit_bare1_p50]=$(jq '."bare-1-thread".p50' "$json")
  fig[hit_bare2proxy_p50]=$(jq '."bare-2-threads-proxy".p50' "$json")
  fig[hit_bare2after_p50]=$(jq '."bare-2-threads-proxy-after-call".p50' "$json")
  fig[hit_roundtrip_p50]=$(jq '."round-trip".p50' "$json")
  fig[hit_semantic_ratio]=$(ratio "${fig[hit_semantic_p50]}" "${fig[hit_bare2_p50]}")
  if [ -n "$b_pid" ]; then
    echo "  proxyB: semantic hit p50 $(jq '."semantic-hit-b".p50' "$json") ms = $(ratio "$(jq '."semantic-hit-b".p50' "$json")" "${fig[hit_bare2_p50]}") x bare 2-thread; exact hit p50 $(jq '."exact-hit-b".p50' "$json") ms"
  fi
}

# ---- hits on both stores ---------------------------------------------------------------------------------------------
# A throwaway PostgreSQL cluster in $work/pg owned by the postgres user, on 127.0.0.1, removed with $work.
start_postgres() {
  pg_bin=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
  local bin=$pg_bin
  [ -x "$bin/initdb" ] || { echo "bench.sh: stores needs Debian's postgresql package (apt-get install postgresql)" >&2; exit 2; }
  pg_port=${BENCH_PG_PORT:-18096}
  mkdir -p "$work/pg"; chown postgres "$work/pg"
  runuser -u postgres -- "$bin/initdb" -D "$work/pg/data" -A trust -U postgres >/dev/null
  runuser -u postgres -- "$bin/pg_ctl" -D "$work/pg/data" -l "$work/pg/log" -w \
    -o "-c listen_addresses=127.0.0.1 -p $pg_port -k $work/pg -c fsync=on" start >/dev/null
  pg_stop() { runuser -u postgres -- "$pg_bin/pg_ctl" -D "$work/pg/data" -m fast stop >/dev/null 2>&1 || true; }
  runuser -u postgres -- psql -h "$work/pg" -p "$pg_port" -qc "CREATE ROLE bench LOGIN" >/dev/null
  runuser -u postgres -- psql -h "$work/pg" -p "$pg_port" -qc "CREATE DATABASE bench OWNER bench" >/dev/null
  echo "  postgres: $("$bin/postgres" --version), 127.0.0.1:$pg_port, fsync on"
}

run_stores() {
  start_postgres
  BENCH_B_ARGS="--Store:Provider=postgres --Store:ConnectionString=Host=127.0.0.1;Port=$pg_port;Username=bench;Database=bench ${BENCH_B_ARGS:-}"
  run_hits
  local json="$work/hits.json"
  echo "== stores: the same hits on the SQLite store (proxy) and the PostgreSQL store (proxyB), one run"
  echo "| case | sqlite p50 | sqlite p99 | postgres p50 | postgres p99 | postgres/sqlite p50 |"
  echo "| --- | --- | --- | --- | --- | --- |"
  local c
  for c in semantic exact; do
    local a50 a99 b50 b99
    a50=$(jq ".\"$c-hit\".p50" "$json"); a99=$(jq ".\"$c-hit\".p99" "$json")
    b50=$(jq ".\"$c-hit-b\".p50" "$json"); b99=$(jq ".\"$c-hit-b\".p99" "$json")
    printf '| %s hit | %.3f ms | %.3f ms | %.3f ms | %.3f ms | %.2f |\n' "$c" "$a50" "$a99" "$b50" "$b99" "$(ratio "$b50" "$a50")"
  done
  pg_stop
}

# ---- small passthrough against nginx ----------------------------------------------------------------------------------
run_passthrough() {
  local json_body; json_body=$(chat_body "$question")
  echo "== passthrough: POST /v1/chat/completions, $(printf '%s' "$json_body" | wc -c)-byte body, $(printf '%s' "$completion_json" | wc -c)-byte JSON back"
  machine; wrk_settings
  start_upstream
  start_nginx_proxy "$upstream_port" 1
  start_proxy passthrough
  start_forwarder
  b_pid=""
  want_b && start_b passthrough "$upstream_port" "${on_sut[@]}"
  local r
  for r in $(seq 1 "$rounds"); do
    measure "direct-r$r" "http://127.0.0.1:$upstream_port/v1/chat/completions"  "$json_body"
    measure "nginx-r$r"  "http://127.0.0.1:$nginx_port/v1/chat/completions"     "$json_body"
    measure "proxy-r$r"  "http://127.0.0.1:$proxy_port/v1/chat/completions"     "$json_body"
    measure "yarp-r$r"   "http://127.0.0.1:$forwarder_port/v1/chat/completions" "$json_body"
    [ -n "$b_pid" ] && measure "proxyB-r$r" "http://127.0.0.1:$b_port/v1/chat/completions" "$json_body"
  done
  if [ -n "$b_pid" ]; then
    echo "  per round, proxyB / proxy req/s: $(for r in $(seq 1 "$rounds"); do printf '%s ' "$(ratio "${rps[proxyB-r$r]}" "${rps[proxy-r$r]}")"; done)"
    stop_tracked "$b_pid"
  fi
  stop_proxy; stop_tracked "$forwarder_pid"; stop_tracked "$nginx_pid"; stop_tracked "$upstream_pid"
  fig[pass_ratio]=$(for r in $(seq 1 "$rounds"); do ratio "${rps[proxy-r$r]}" "${rps[nginx-r$r]}"; echo; done | median)
  fig[pass_yarp_ratio]=$(for r in $(seq 1 "$rounds"); do ratio "${rps[yarp-r$r]}" "${rps[nginx-r$r]}"; echo; done | median)
  fig[pass_proxy_yarp]=$(for r in $(seq 1 "$rounds"); do ratio "${rps[proxy-r$r]}" "${rps[yarp-r$r]}"; echo; done | median)
  fig[pass_added_proxy]=$(for r in $(seq 1 "$rounds"); do minus "${p50[proxy-r$r]}" "${p50[direct-r$r]}"; echo; done | median)
  fig[pass_added_nginx]=$(for r in $(seq 1 "$rounds"); do minus "${p50[nginx-r$r]}" "${p50[direct-r$r]}"; echo; done | median)
  echo "  per round, proxy / nginx req/s: $(for r in $(seq 1 "$rounds"); do printf '%s ' "$(ratio "${rps[proxy-r$r]}" "${rps[nginx-r$r]}")"; done)"
}

source scripts/bench/restart.sh

# ---- the closing table ----------------------------------------------------------------------------------------------
has() { [ -n "${fig[$1]:-}" ]; }
summary() {
  echo
  # Timings taken while other work kept the cores busy are not comparable to a quiet run: say so beside the table.
  # The benchmark itself keeps about 2 runnable, so the line is drawn one above the core count.
  awk -v l="$(cut -d' ' -f1 /proc/loadavg)" -v n="$(nproc)" 'BEGIN{ if (l > n + 1) printf "WARNING: 1-minute load %s > %s cores + 1 (a run adds about 2 by itself): other work shared the machine; re-run in a quiet window before quoting these\n", l, n }'
  echo "== ratios against the targets of issue #16 (medians over rounds; load now $(loadavg))"
  echo "| figure | measured | target | verdict |"
  echo "| --- | ---: | --- | --- |"
  if has fanout_cpu_ratio; then
    local ttfb_limit; ttfb_limit=$(awk -v n="${fig[fanout_ttfb_added_nginx]}" 'BEGIN{printf "%.1f", n+5}')
    printf '| fan-out CPU time, proxy / nginx (%s vs %s ms) | %.2f | ≤ 1.5 | %s |\n' "${fig[fanout_cpu_proxy]}" "${fig[fanout_cpu_nginx]}" \
      "${fig[fanout_cpu_ratio]}" "$(verdict "${fig[fanout_cpu_ratio]}" '<=' 1.5)"
    printf '| fan-out added TTFB p99, proxy (nginx: %+.1f ms) | %+.1f ms | ≤ nginx + 5 = %s ms | %s |\n' "${fig[fanout_ttfb_added_nginx]}" \
      "${fig[fanout_ttfb_added_proxy]}" "$ttfb_limit" "$(verdict "${fig[fanout_ttfb_added_proxy]}" '<=' "$ttfb_limit")"
    printf '| fan-out, bare Kestrel+YARP: CPU / nginx; added TTFB p99 | %.2f; %+.1f ms | (the stack'"'"'s floor) | |\n' \
      "${fig[fanout_cpu_yarp_ratio]}" "${fig[fanout_ttfb_added_yarp]}"
    printf '| fan-out added gap p99, proxy / nginx | %+.1f / %+.1f ms | (streaming stays incremental) | |\n' "${fig[fanout_gap_added_proxy]}" "${fig[fanout_gap_added_nginx]}"
    printf '| fan-out added arrival lag p99, proxy / nginx | %+.1f / %+.1f ms | | |\n' "${fig[fanout_lag_added_proxy]}" "${fig[fanout_lag_added_nginx]}"
    printf '| proxy VmRSS right after the fan-out (model loaded; %s MB at start) | %s MB = %.2f × 300 MB | ≤ 300 MB | %s |\n' "${fig[rss_start]}" \
      "${fig[rss_end]}" "$(ratio "${fig[rss_end]}" 300)" "$(verdict "${fig[rss_end]}" '<=' 300)"
    printf '| proxy VmRSS %s s after the fan-out (idle trim) | %s MB = %.2f × 300 MB | ≤ 300 MB | %s |\n' "${BENCH_IDLE_S:-8}" \
      "${fig[rss_idle]}" "$(ratio "${fig[rss_idle]}" 300)" "$(verdict "${fig[rss_idle]}" '<=' 300)"
    printf '| bare Kestrel+YARP VmRSS growth over the fan-out | +%s MB | (the stack'"'"'s own) | |\n' "${fig[rss_yarp_growth]}"
  fi
  if has hit_semantic_ratio; then
    printf '| semantic hit p50 / bare 2-thread run p50 (%.3f / %.3f ms) | %.2f | ≤ 1.3 | %s |\n' "${fig[hit_semantic_p50]}" "${fig[hit_bare2_p50]}" \
      "${fig[hit_semantic_ratio]}" "$(verdict "${fig[hit_semantic_ratio]}" '<=' 1.3)"
    printf '| exact hit p50 (empty round trip %.3f ms) | %.3f ms | ≤ 0.5 ms | %s |\n' "${fig[hit_roundtrip_p50]}" "${fig[hit_exact_p50]}" \
      "$(verdict "${fig[hit_exact_p50]}" '<=' 0.5)"
    printf '| semantic hit p50 / bare run with the proxy'"'"'s session settings (2 threads, no spinning; %.3f ms) | %.2f | | |\n' \
      "${fig[hit_bare2proxy_p50]}" "$(ratio "${fig[hit_semantic_p50]}" "${fig[hit_bare2proxy_p50]}")"
    printf '| semantic hit p50 / that bare run right after an exact hit on the proxy (%.3f ms) | %.2f | | |\n' \
      "${fig[hit_bare2after_p50]}" "$(ratio "${fig[hit_semantic_p50]}" "${fig[hit_bare2after_p50]}")"
    printf '| the model run inside the proxy while serving (mean, %.3f ms) / the bare run with its settings | %.2f | | |\n' \
      "${fig[hit_embed_mean]}" "$(ratio "${fig[hit_embed_mean]}" "${fig[hit_bare2proxy_p50]}")"
  fi
  if has restart_snapshot; then
    printf '| restart with %s entries (#14): first semantic hit with the snapshot (ready at %s s) | %s s | ≤ 30 s | %s |\n' "${fig[restart_n]}" \
      "${fig[restart_floor]}" "${fig[restart_snapshot]}" "$(verdict "${fig[restart_snapshot]}" '<=' 30)"
    has restart_rebuild && printf '| restart: first semantic hit, snapshot / rebuild (%s s) | %s | | |\n' "${fig[restart_rebuild]}" \
      "$(ratio "${fig[restart_snapshot]}" "${fig[restart_rebuild]}")"
  fi
  if has pass_ratio; then
    printf '| small passthrough req/s, proxy / nginx | %.2f | ≥ 0.5 | %s |\n' "${fig[pass_ratio]}" "$(verdict "${fig[pass_ratio]}" '>=' 0.5)"
    printf '| small passthrough req/s, bare Kestrel+YARP / nginx; proxy / bare | %.2f; %.2f | (the stack'"'"'s floor) | |\n' "${fig[pass_yarp_ratio]}" "${fig[pass_proxy_yarp]}"
    printf '| small passthrough added p50, proxy / nginx | %+.3f / %+.3f ms | | |\n' "${fig[pass_added_proxy]}" "${fig[pass_added_nginx]}"
  fi
}

# One line, parsed whole before it runs: editing this file during a run cannot change what the run does next.
case "$mode" in all) run_fanout; run_hits; run_passthrough; summary ;; fanout) run_fanout; summary ;; rss) run_fanout 1; summary ;; hits) run_hits; summary ;; stores) run_stores ;; passthrough) run_passthrough; summary ;; lanes) run_lanes ;; soak) run_soak "$soak_minutes" ;; restart) run_restart "$restart_entries"; summary ;; esac; exit $?
