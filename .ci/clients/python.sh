#!/usr/bin/env bash
# Python client suite (run by .ci/test; also runnable by hand from anywhere).
#
# On a fresh machine with only the package registries reachable:
#   1. creates a virtual environment (python3 -m venv) in a temporary
#      directory and installs the pinned test dependencies
#      (clients/python/requirements-test.txt) and then the client itself with
#      `pip install ./clients/python`, exactly as a user would;
#   2. regenerates the gRPC stubs with the pinned grpcio-tools
#      (clients/python/requirements-generate.txt) into a temporary directory
#      and fails if they differ from the committed src/mixd/_proto;
#   3. builds the daemon once and runs the pytest suite against it (the
#      tests start their own daemons on 127.0.0.1 port 0 and a Unix socket).
# pytest's exit code 5 (no tests collected) counts as a failure.
# Environment: PYTHON (default python3); MIXD_BIN to reuse a built daemon.
set -euo pipefail
cd "$(dirname "$0")/../.."
root=$(pwd)
py="${PYTHON:-python3}"

work=$(mktemp -d)
cleanup() { rm -rf "$work"; }
trap cleanup EXIT

echo "python client: virtual environment in $work/venv ($("$py" --version))"
"$py" -m venv "$work/venv"
vpy="$work/venv/bin/python"
export PIP_DISABLE_PIP_VERSION_CHECK=1
"$vpy" -m pip install --quiet -r clients/python/requirements-test.txt
"$vpy" -m pip install --quiet ./clients/python
"$vpy" -m pip install --quiet -r clients/python/requirements-generate.txt
"$vpy" -m pip check

echo "python client: checking that the generated stubs are fresh"
PYTHON="$vpy" bash clients/python/scripts/generate.sh "$work/gen"
if ! diff -r -x __pycache__ clients/python/src/mixd/_proto "$work/gen"; then
  echo "clients/python/src/mixd/_proto is stale: run clients/python/scripts/generate.sh and commit the result" >&2
  exit 1
fi

if [ -z "${MIXD_BIN:-}" ]; then
  echo "python client: building the daemon"
  go build -o "$work/mixd" ./cmd/mixd
  export MIXD_BIN="$work/mixd"
fi

echo "python client: running the suite"
cd "$root/clients/python"
set +e
"$vpy" -m pytest -rs -p no:cacheprovider tests
rc=$?
set -e
if [ "$rc" -eq 5 ]; then
  echo "python client: pytest collected no tests; that is a failure" >&2
  exit 1
fi
exit "$rc"
