# Regenerates the committed protobuf/gRPC Go code. Needs protoc (Debian: protobuf-compiler)
# and the two plugins:
#   go install google.golang.org/protobuf/cmd/protoc-gen-go@v1.36.12
#   go install google.golang.org/grpc/cmd/protoc-gen-go-grpc@v1.5.1
GOBIN ?= $(shell go env GOPATH)/bin

.PHONY: proto test
proto:
	PATH="$(GOBIN):$$PATH" protoc --proto_path=proto \
		--go_out=proto --go_opt=module=bbmx/proto \
		--go-grpc_out=proto --go-grpc_opt=module=bbmx/proto \
		bbmx/v1/coordinator.proto

test:
	go test ./...
