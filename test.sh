#!/usr/bin/env bash
# The one test command (README "Test"): installs what the tests need on a bare
# Debian machine, then vets and runs the whole suite with the race detector.
set -euo pipefail
cd "$(dirname "$0")"

need=()
command -v mosquitto >/dev/null 2>&1 || [ -x /usr/sbin/mosquitto ] || need+=(mosquitto)
[ -x /usr/bin/chromium ] || need+=(chromium)
command -v gcc >/dev/null 2>&1 || need+=(gcc libc6-dev) # -race needs cgo
if [ ${#need[@]} -gt 0 ]; then
  sudo=""
  [ "$(id -u)" -eq 0 ] || sudo="sudo"
  echo "test.sh: installing ${need[*]} with apt-get"
  $sudo apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${need[@]}"
fi

go vet ./...
go test -race -count=1 -timeout 14m ./...
