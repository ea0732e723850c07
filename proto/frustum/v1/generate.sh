#!/bin/sh
# Regenerates the Go code from frustum.proto and jobs.proto. Needs Debian's
# protobuf-compiler (protoc, with its google/protobuf/*.proto includes) and
# the pinned plugins, which this script installs:
#   apt-get install -y protobuf-compiler
#   go generate ./proto/...
set -e
cd "$(dirname "$0")"
gobin=$(go env GOPATH)/bin
GOBIN="$gobin" go install google.golang.org/protobuf/cmd/protoc-gen-go@v1.36.12
GOBIN="$gobin" go install google.golang.org/grpc/cmd/protoc-gen-go-grpc@v1.6.0
cd ../..
protoc -I . -I /usr/include \
	--plugin=protoc-gen-go="$gobin/protoc-gen-go" --go_out=. --go_opt=paths=source_relative \
	--plugin=protoc-gen-go-grpc="$gobin/protoc-gen-go-grpc" --go-grpc_out=. --go-grpc_opt=paths=source_relative \
	frustum/v1/frustum.proto frustum/v1/jobs.proto
