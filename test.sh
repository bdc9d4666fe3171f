#!/usr/bin/env bash
# The one test command (README "Test"): installs what the tests need on a bare
# Debian machine, checks that go.mod is tidy, then vets, runs staticcheck and
# runs the whole suite with the race detector.
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

# staticcheck is pinned: a new release can add checks, and the suite should not
# start failing on its own. v0.8.2 is release 2026.2.2, which targets Go 1.26.
staticcheck_version=v0.8.2
gobin="$(go env GOBIN)"
[ -n "$gobin" ] || gobin="$(go env GOPATH)/bin"
staticcheck="$gobin/staticcheck"
if ! "$staticcheck" -version 2>/dev/null | grep -qF "(${staticcheck_version#v})"; then
  echo "test.sh: installing staticcheck $staticcheck_version with go install"
  go install "honnef.co/go/tools/cmd/staticcheck@$staticcheck_version"
fi

if ! go mod tidy -diff; then
  echo "test.sh: go.mod/go.sum are not tidy (diff above); run 'go mod tidy' and commit the result" >&2
  exit 1
fi

go vet ./...
"$staticcheck" ./...
go test -race -count=1 -timeout 14m ./...
