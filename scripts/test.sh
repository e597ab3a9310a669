#!/usr/bin/env bash
# The one test command: installs what the tests need on a fresh Debian machine, then runs every test.
set -euo pipefail
cd "$(dirname "$0")/.."

need=()
command -v promtool   >/dev/null 2>&1 || need+=(prometheus)
command -v prometheus >/dev/null 2>&1 || need+=(prometheus)
[ -d /usr/share/wordnet ] || need+=(wordnet-base)
[ -d /usr/share/fonts/truetype/dejavu ] || need+=(fonts-dejavu-core)   # text in the tune charts
# The PostgreSQL store's tests start throwaway clusters with the server's initdb and pg_ctl (Fixtures/PostgresCluster).
pg_bin="$(pg_config --bindir 2>/dev/null || true)"
{ [ -n "$pg_bin" ] && [ -x "$pg_bin/initdb" ]; } || compgen -G '/usr/lib/postgresql/*/bin/initdb' >/dev/null || need+=(postgresql)
if [ ${#need[@]} -gt 0 ]; then
  echo "test.sh: installing ${need[*]}"
  export DEBIAN_FRONTEND=noninteractive
  sudo_cmd=""; [ "$(id -u)" -ne 0 ] && sudo_cmd="sudo"
  $sudo_cmd apt-get update -qq
  $sudo_cmd apt-get install -y -qq --no-install-recommends $(printf '%s\n' "${need[@]}" | sort -u) >/dev/null
fi

# Official provider clients and RAG frameworks, run as the proxy's clients (tests/clients/package.json pins them;
# the `node` package brings the Node.js 22 they need, whatever Node.js the machine has).
clients=tests/clients
if [ ! -x "$clients/node_modules/.bin/node" ] || [ "$clients/package-lock.json" -nt "$clients/node_modules/.package-lock.json" ]; then
  command -v npm >/dev/null 2>&1 || { echo "test.sh: npm is needed for the client tests (apt-get install npm)"; exit 1; }
  echo "test.sh: installing the client packages of $clients"
  (cd "$clients" && npm ci --no-audit --no-fund --loglevel=error)
fi

export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1
dotnet test RewriteProxy.sln -c Release --logger "console;verbosity=normal" "$@"
