// Package onnxpb holds the Go protocol-buffer types of the ONNX model format.
//
// The schema is the ONNX project's own (onnx.proto, Apache-2.0), as shipped by
// Debian's libonnx-dev in /usr/include/onnx/onnx.proto, converted to proto3 the
// way the ONNX project makes its onnx.proto3: the syntax line changed and the
// "optional" labels dropped. The wire format is the same; proto3 enums are open,
// so data types newer than the schema arrive as their numbers instead of being
// dropped into unknown fields.
//
// onnx.pb.go is generated; regenerate it with `go generate ./modelio/onnxpb`
// (needs protoc from Debian's protobuf-compiler).
package onnxpb

//go:generate sh -c "sed -e 's/^syntax = \"proto2\";/syntax = \"proto3\";/' -e 's/^\\([[:space:]]*\\)optional /\\1/' /usr/include/onnx/onnx.proto > onnx.proto3"
//go:generate sh -c "go build -o \"$DOLLAR{TMPDIR:-/tmp}/protoc-gen-go\" google.golang.org/protobuf/cmd/protoc-gen-go && protoc --plugin=protoc-gen-go=\"$DOLLAR{TMPDIR:-/tmp}/protoc-gen-go\" --go_out=. --go_opt=paths=source_relative --go_opt=Monnx.proto3=fovea/modelio/onnxpb onnx.proto3"
