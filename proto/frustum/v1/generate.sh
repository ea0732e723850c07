#!/bin/sh
# Regenerates frustum.pb.go from frustum.proto. Needs Debian's protobuf-compiler
# (protoc) and the pinned protoc-gen-go, which this script installs:
#   apt-get install -y protobuf-compiler
#   go generate ./proto/...
set -e
cd "$(dirname "$0")"
gobin=$(go env GOPATH)/bin
GOBIN="$gobin" go install google.golang.org/protobuf/cmd/protoc-gen-go@v1.36.12
protoc --plugin=protoc-gen-go="$gobin/protoc-gen-go" --go_out=. --go_opt=paths=source_relative frustum.proto
