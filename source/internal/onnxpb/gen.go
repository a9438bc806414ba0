// Package onnxpb holds Go bindings for the ONNX model file, generated from
// onnx-ml.proto of ONNX 1.23.2 (the schema file shipped in the onnx 1.23.2
// wheel, copied here unchanged; proto2 syntax, the same wire format as
// onnx.proto3). The generated onnx-ml.pb.go is committed; CI does not run
// the generator. To regenerate, with protoc 3.21.12 (Debian's
// protobuf-compiler) and protoc-gen-go v1.36.11
// (go install google.golang.org/protobuf/cmd/protoc-gen-go@v1.36.11) on PATH:
//
//	go generate ./source/internal/onnxpb
package onnxpb

//go:generate protoc --go_out=. --go_opt=paths=source_relative --go_opt=Monnx-ml.proto=github.com/sawmill-dev/sawmill/source/internal/onnxpb;onnxpb onnx-ml.proto
