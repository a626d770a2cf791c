#!/usr/bin/env bash
# Regenerates the Python gRPC stubs of the public API (proto/mixd/v1) into
# src/mixd/_proto/ with grpcio-tools, then rewrites their imports so that the
# stubs live inside the mixd package (mixd._proto) instead of a top-level
# "mixd.v1" package that would clash with ours.
#
# Usage: scripts/generate.sh [OUTDIR]
#   OUTDIR defaults to src/mixd/_proto (relative to clients/python). The CI
#   freshness check passes a temporary directory and compares.
# Needs: python3 with grpcio-tools at the version pinned in
# requirements-generate.txt (the generated code records that version; the
# package's runtime pins in pyproject.toml must not be older).
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
repo="$(cd "$here/../.." && pwd)"
out="${1:-$here/src/mixd/_proto}"
python="${PYTHON:-python3}"

tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT

"$python" -m grpc_tools.protoc \
  -I"$repo/proto" \
  --python_out="$tmp" --pyi_out="$tmp" --grpc_python_out="$tmp" \
  mixd/v1/types.proto mixd/v1/mixture_service.proto

mkdir -p "$out"
for f in types_pb2.py types_pb2.pyi mixture_service_pb2.py mixture_service_pb2.pyi mixture_service_pb2_grpc.py; do
  # "from mixd.v1 import x_pb2" -> "from mixd._proto import x_pb2", and the
  # module names recorded in the descriptors' builder call likewise.
  sed -e 's/^from mixd\.v1 import /from mixd._proto import /' \
      -e "s/'mixd\.v1\.\([a-z_]*_pb2\)'/'mixd._proto.\1'/" \
      "$tmp/mixd/v1/$f" > "$out/$f"
done
if grep -n 'mixd\.v1 import\|import mixd\.v1' "$out"/*.py "$out"/*.pyi; then
  echo "generate.sh: an import of mixd.v1 survived the rewrite" >&2
  exit 1
fi
cat > "$out/__init__.py" <<'PY'
"""Generated gRPC stubs of the mixd public API (proto/mixd/v1).

Made by clients/python/scripts/generate.sh; do not edit by hand.
"""
PY
