# Sourced by scripts/bench.sh: the `restart` subject (issue #14): how long a restarted proxy takes to serve its first
# semantic hit, with an index snapshot and with a rebuild from the store, at ENTRIES entries in one scope (a graph).
#
#   scripts/bench.sh restart [entries]     (default 100000)
#
# 1. A proxy on an empty store answers the benchmark question once (a miss: one real entry, stored) and stops.
# 2. `RewriteProxy.Benchmarks seed-store` adds entries - 1 synthetic entries to the same scope through the store's API.
# 3. Start with no snapshot: the index is rebuilt from the store (the graph built from scratch), then saved.
# 4. Stop gracefully, start again: the index is loaded from the snapshot and caught up from the store.
# 5. Start once more with a short Store:IndexSnapshotInterval, replace one entry (no-cache), and probe the paraphrase
#    back to back until the interval save has finished: its log line gives how long index writers waited, the
#    probes how long lookups took meanwhile.
# BENCH_RESTART_COLD=1 drops the store's and the snapshot's pages from the page cache before each start (dd
# iflag=nocache, these files only): a restart after a reboot, or on a new node with the volume attached.
# BENCH_RESTART_REUSE=DIR starts from the store and snapshot kept (BENCH_KEEP=1) by an earlier run in DIR/restart:
# steps 4 and 5 only, no seeding and no rebuild.
# Each start is timed from the process's launch to /readyz (the floor: process, model, store) and to the first
# semantic hit of the paraphrase, probed with `Cache-Control: only-if-cached` every 250 ms (a probe never calls the
# upstream nor stores anything). The proxy is not pinned: it runs as it would in production.

restart_probe() { # -> prints X-Rewrite-Cache of an only-if-cached lane call of the paraphrase (empty when not up)
  curl -sS -m 30 -o /dev/null -D - -H 'Content-Type: application/json' -H 'Authorization: Bearer sk-bench-tenant' \
    -H 'Cache-Control: only-if-cached' --data-binary "$(chat_body "$paraphrase")" \
    "http://127.0.0.1:$proxy_port/lane/draft/v1/chat/completions" 2>/dev/null \
    | tr -d '\r' | awk -F': ' 'tolower($1)=="x-rewrite-cache"{print $2}'
}

restart_stop() { # pid seconds: SIGTERM, then wait for the graceful stop (the final save) before anything harsher
  kill -TERM "$1" 2>/dev/null || return 0
  for _ in $(seq $(($2 * 10))); do kill -0 "$1" 2>/dev/null || break; sleep 0.1; done
  stop_tracked "$1"
}

restart_once() { # phase args... -> sets restart_ready[phase], restart_hit[phase]
  local phase=$1 t0 now got="" before; shift
  if [ "${BENCH_RESTART_COLD:-0}" = 1 ]; then
    local f
    for f in "$restart_dir"/cache.db "$restart_dir"/cache.db-wal "$restart_dir"/cache.db.index; do
      [ -f "$f" ] && dd if="$f" iflag=nocache count=0 status=none
    done
  fi
  before=$(loadavg)
  t0=$(date +%s.%N)
  env "${proxy_env[@]}" "$proxy_bin" serve --urls "http://127.0.0.1:$proxy_port" \
    "--Upstream:BaseUrl=http://127.0.0.1:$upstream_port/v1" "--Store:Path=$restart_dir/cache.db" "${proxy_args[@]}" "$@" \
    >"$restart_dir/proxy-$phase.log" 2>&1 &
  proxy_pid=$!; pids+=($proxy_pid)
  until curl -fsS -o /dev/null "http://127.0.0.1:$proxy_port/readyz" 2>/dev/null; do
    kill -0 "$proxy_pid" 2>/dev/null || { echo "bench.sh: the proxy exited:" >&2; tail "$restart_dir/proxy-$phase.log" >&2; exit 1; }
    sleep 0.05
  done
  restart_ready[$phase]=$(awk -v a="$t0" -v b="$(date +%s.%N)" 'BEGIN{printf "%.2f", b-a}')
  while [ "$got" != hit-semantic ]; do
    got=$(restart_probe)
    now=$(date +%s.%N)
    if awk -v a="$t0" -v b="$now" -v m="$restart_limit" 'BEGIN{exit !(b-a > m)}'; then
      echo "bench.sh: no semantic hit within $restart_limit s ($phase; last X-Rewrite-Cache '$got')" >&2; exit 1
    fi
    [ "$got" = hit-semantic ] || sleep 0.25
  done
  restart_hit[$phase]=$(awk -v a="$t0" -v b="$now" 'BEGIN{printf "%.2f", b-a}')
  printf '  %-9s ready %7s s   first semantic hit %8s s   load %s -> %s\n' "$phase" "${restart_ready[$phase]}" \
    "${restart_hit[$phase]}" "$before" "$(loadavg)"
}

restart_save() { # args...: step 5
  local times="$restart_dir/probe-times.txt" log="$restart_dir/proxy-save.log" deadline body
  restart_once save "$@" "--Store:IndexSnapshotInterval=${BENCH_RESTART_INTERVAL:-20s}"
  # no-cache: the benchmark question is asked upstream again and its entry replaced (a change), whatever the guards say.
  [ "$(curl -sS -o /dev/null -D - -H 'Content-Type: application/json' -H 'Authorization: Bearer sk-bench-tenant' \
      -H 'Cache-Control: no-cache' --data-binary "$(chat_body "$question")" "http://127.0.0.1:$proxy_port/lane/draft/v1/chat/completions" \
      | tr -d '\r' | awk -F': ' 'tolower($1)=="x-rewrite-cache"{print $2}')" = miss ] || { echo "bench.sh: the no-cache call was no miss" >&2; exit 1; }
  : > "$times"
  body=$(chat_body "$paraphrase")
  deadline=$((SECONDS + 300))
  until grep -q 'index snapshot saved (interval)' "$log"; do
    curl -sS -m 30 -o /dev/null -w '%{time_total}\n' -H 'Content-Type: application/json' -H 'Authorization: Bearer sk-bench-tenant' \
      -H 'Cache-Control: only-if-cached' --data-binary "$body" "http://127.0.0.1:$proxy_port/lane/draft/v1/chat/completions" >> "$times"
    [ $SECONDS -gt $deadline ] && { echo "bench.sh: no interval save within 300 s" >&2; exit 1; }
  done
  # The save's window, from its log line: it ended at the line's time and took the milliseconds it states. Lookups
  # are timed by the proxy's own request log (ISO times in UTC compare as text), beside the client's view.
  local line end_iso took start_iso
  line=$(grep 'index snapshot saved (interval)' "$log" | head -1)
  end_iso=$(cut -d' ' -f1 <<< "$line")
  took=$(sed -E 's/.* MB in ([0-9]+) ms.*/\1/' <<< "$line")
  start_iso=$(date -u -d "@$(awk -v e="$(date -d "$end_iso" +%s.%N)" -v t="$took" 'BEGIN{printf "%.3f", e - t/1000}')" +%Y-%m-%dT%H:%M:%S.%3NZ)
  restart_lookups() { # during|before -> count, median ms, max ms of the proxy's semantic-hit lookups
    awk -v s="$start_iso" -v e="$end_iso" -v w="$1" '/RequestLog/ && /cache=hit-semantic/ {
        inside = ($1 >= s && $1 <= e); if ((w == "during") == inside && (w == "during" || $1 < s)) for (i = 1; i <= NF; i++) if ($i == "ms") print $(i-1) }' "$log" \
      | sort -g | awk '{v[NR]=$1} END{ if (NR==0) print "0 - -"; else printf "%d %.1f %.1f\n", NR, (NR%2 ? v[(NR+1)/2] : (v[NR/2]+v[NR/2+1])/2), v[NR] }'
  }
  local n_in med_in max_in n_out med_out max_out
  read -r n_in med_in max_in <<< "$(restart_lookups during)"
  read -r n_out med_out max_out <<< "$(restart_lookups before)"
  printf '  semantic-hit lookups back to back, as the proxy timed them: during the %s ms save %s, median %s ms, max %s ms; before it %s, median %s ms, max %s ms\n' \
    "$took" "$n_in" "$med_in" "$max_in" "$n_out" "$med_out" "$max_out"
  printf '  the same lookups as the client saw them (curl, all): %s, median %s ms, max %s ms   load %s\n' "$(wc -l < "$times")" \
    "$(awk '{print $1*1000}' "$times" | median)" "$(awk '{print $1*1000}' "$times" | sort -g | tail -1)" "$(loadavg)"
  restart_stop "$proxy_pid" 600
}

run_restart() { # entries
  local n=${1:-100000}
  declare -gA restart_ready restart_hit
  restart_dir="${BENCH_RESTART_REUSE:-$work}/restart"
  restart_limit=${BENCH_RESTART_LIMIT:-3600}
  local keep=("--Store:MaxEntries=$((n + 1000))" "--Store:IndexSnapshotPath=$restart_dir/cache.db.index")
  machine
  echo "restart: $n entries in one scope; snapshot $restart_dir/cache.db.index"
  start_upstream
  proxy_pin=(env)
  if [ -n "${BENCH_RESTART_REUSE:-}" ]; then
    echo "  reusing the store and snapshot in $restart_dir"
  else
    start_proxy restart "${keep[@]}"
    expect_cache "$(chat_body "$question")" miss
    restart_stop "$proxy_pid" 60
    rm -f "$restart_dir/cache.db.index"
    echo "  seeding $((n - 1)) synthetic entries (load $(loadavg))"
    dotnet "$hits_dll" seed-store "$restart_dir/cache.db" "$n" | sed 's/^/  /'
    restart_once rebuild "${keep[@]}"
    # The rebuilt index is saved once rebuilt; the graceful stop saves only what changed since.
    for _ in $(seq 600); do grep -q 'index snapshot saved' "$restart_dir/proxy-rebuild.log" && break; sleep 1; done
    restart_stop "$proxy_pid" 600
  fi
  restart_once snapshot "${keep[@]}"
  restart_stop "$proxy_pid" 600
  restart_save "${keep[@]}"
  echo "  the proxy's own lines:"
  grep -h -E 'index (rebuilt|loaded|snapshot)|not used' "$restart_dir"/proxy-*.log | sed 's/^/    /'
  echo "  snapshot file: $(stat -c %s "$restart_dir/cache.db.index") bytes, mode $(stat -c %a "$restart_dir/cache.db.index")"
  fig[restart_n]=$n
  fig[restart_floor]=${restart_ready[snapshot]}
  fig[restart_snapshot]=${restart_hit[snapshot]}
  fig[restart_rebuild]=${restart_hit[rebuild]:-}
}
