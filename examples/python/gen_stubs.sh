#!/bin/sh
# Generates the Python modules of proto/soak/v1 into OUT_DIR (default
# ./stubs), for watch_job.py. Needs Debian's protoc with the gRPC Python
# plugin: apt-get install protobuf-compiler protobuf-compiler-grpc
# (and python3-grpcio python3-protobuf to run the script).
set -eu
here=$(cd "$(dirname "$0")" && pwd)
out=${1:-"$here/stubs"}
plugin=$(command -v grpc_python_plugin || true)
if [ -z "$plugin" ]; then
  echo "gen_stubs.sh: grpc_python_plugin not found (apt-get install protobuf-compiler-grpc)" >&2
  exit 1
fi
mkdir -p "$out"
protoc -I "$here/../../proto" \
  --python_out="$out" \
  --plugin=protoc-gen-grpc_python="$plugin" --grpc_python_out="$out" \
  "$here"/../../proto/soak/v1/*.proto
