#!/usr/bin/env bash
# Installs what pftgw's build, demo and tests need, from Debian's packages and
# the npm registry (pinned in tests/conformance/package-lock.json).
# Idempotent: does nothing when everything is there.
# Node: never installs or replaces Node or npm when a `node` is on PATH
# (DECISIONS.md); installs Debian's nodejs and npm only when there is none.
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)

debian_packages=(
  g++ cmake ninja-build pkg-config
  nlohmann-json3-dev libpugixml-dev libcli11-dev libfmt-dev
  libgtest-dev libbenchmark-dev librapidcheck-dev
  clang-format libxml2-utils python3 python3-hl7 libtomlplusplus-dev
  clang libclang-rt-14-dev
  libhowardhinnant-date-dev tzdata
  libgoogle-perftools-dev
)

missing=()
for p in "${debian_packages[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done
if ! command -v node >/dev/null 2>&1; then
  missing+=(nodejs npm)
fi

if [ ${#missing[@]} -gt 0 ]; then
  echo "install-deps: installing from Debian: ${missing[*]}"
  sudo_cmd=()
  [ "$(id -u)" -eq 0 ] || sudo_cmd=(sudo)
  "${sudo_cmd[@]}" apt-get update -qq
  DEBIAN_FRONTEND=noninteractive "${sudo_cmd[@]}" apt-get install -y -qq --no-install-recommends "${missing[@]}"
fi

# npm packages for the outside-reference tests, only when the lock file changed.
conf="$here/tests/conformance"
stamp="$conf/node_modules/.pftgw-lock-sha256"
want=$(sha256sum "$conf/package-lock.json" | cut -d' ' -f1)
if [ ! -f "$stamp" ] || [ "$(cat "$stamp")" != "$want" ]; then
  echo "install-deps: installing the pinned npm packages in tests/conformance"
  (cd "$conf" && npm ci --no-audit --no-fund --loglevel=error)
  echo "$want" > "$stamp"
fi
