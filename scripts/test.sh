#!/usr/bin/env bash
# The one test command: installs what the tests need on a fresh Debian machine, then runs every test.
set -euo pipefail
cd "$(dirname "$0")/.."

need=()
command -v promtool   >/dev/null 2>&1 || need+=(prometheus)
command -v prometheus >/dev/null 2>&1 || need+=(prometheus)
[ -d /usr/share/wordnet ] || need+=(wordnet-base)
[ -d /usr/share/fonts/truetype/dejavu ] || need+=(fonts-dejavu-core)   # text in the tune charts
if [ ${#need[@]} -gt 0 ]; then
  echo "test.sh: installing ${need[*]}"
  export DEBIAN_FRONTEND=noninteractive
  sudo_cmd=""; [ "$(id -u)" -ne 0 ] && sudo_cmd="sudo"
  $sudo_cmd apt-get update -qq
  $sudo_cmd apt-get install -y -qq --no-install-recommends $(printf '%s\n' "${need[@]}" | sort -u) >/dev/null
fi

export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1
dotnet test RewriteProxy.sln -c Release --logger "console;verbosity=normal" "$@"
