package tasks

import (
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
)

// JSONOptions returns the one protojson option set that Frustum uses
// everywhere: lowerCamelCase names, multiline with two-space indentation,
// and every field emitted, unpopulated ones included (an unset optional
// number, such as sz where S^z is not a good quantum number, is still left
// out).
func JSONOptions() protojson.MarshalOptions {
	return protojson.MarshalOptions{
		Multiline:       true,
		Indent:          "  ",
		EmitUnpopulated: true,
		UseProtoNames:   false,
	}
}

// MarshalJSON returns the protojson of m in the form of JSONOptions,
// ending with a newline.
func MarshalJSON(m proto.Message) ([]byte, error) {
	b, err := JSONOptions().Marshal(m)
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}
