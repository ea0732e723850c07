package client

import (
	"context"
	"errors"
	"io"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	frustumv1 "frustum/proto/frustum/v1"
)

// resultTypes are the messages that a job's result can be, by full name.
var resultTypes = map[protoreflect.FullName]func() proto.Message{
	(*frustumv1.SpectrumResult)(nil).ProtoReflect().Descriptor().FullName():      func() proto.Message { return new(frustumv1.SpectrumResult) },
	(*frustumv1.ThermoResult)(nil).ProtoReflect().Descriptor().FullName():        func() proto.Message { return new(frustumv1.ThermoResult) },
	(*frustumv1.MagnetizationResult)(nil).ProtoReflect().Descriptor().FullName(): func() proto.Message { return new(frustumv1.MagnetizationResult) },
	(*frustumv1.FitResult)(nil).ProtoReflect().Descriptor().FullName():           func() proto.Message { return new(frustumv1.FitResult) },
}

// maxPrealloc bounds the buffer that Result allocates ahead from the total
// size that the server announces; beyond it the buffer grows as data comes.
const maxPrealloc = 64 << 20

// Result fetches the result of a succeeded job with GetJobResult and returns
// the result message: a *frustumv1.SpectrumResult, *ThermoResult or
// *MagnetizationResult or *FitResult, by the type the chunks name. The chunks must come in
// order, without gaps or overlaps, with one type and one total size, and
// add up to that size; otherwise Result returns a codes.DataLoss error.
func (c *Client) Result(ctx context.Context, name string) (proto.Message, error) {
	name = JobName(name)
	stream, err := c.rpc.GetJobResult(ctx, &frustumv1.GetJobResultRequest{Name: name})
	if err != nil {
		return nil, err
	}
	var (
		typ   string
		total int64
		buf   []byte
		first = true
	)
	for {
		chunk, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, err
		}
		off, size := chunk.GetOffset(), int64(len(buf))
		if first {
			first = false
			typ, total = chunk.GetType(), chunk.GetTotalSize()
			if typ == "" {
				return nil, status.Errorf(codes.DataLoss, "result of %s: the first chunk names no type", name)
			}
			if total < 0 {
				return nil, status.Errorf(codes.DataLoss, "result of %s: negative total size %d", name, total)
			}
			buf = make([]byte, 0, min(total, maxPrealloc))
		} else {
			if chunk.GetType() != typ {
				return nil, status.Errorf(codes.DataLoss, "result of %s: chunk at offset %d is of type %q, the first was %q", name, off, chunk.GetType(), typ)
			}
			if chunk.GetTotalSize() != total {
				return nil, status.Errorf(codes.DataLoss, "result of %s: chunk at offset %d gives the total size %d, the first gave %d", name, off, chunk.GetTotalSize(), total)
			}
		}
		if off != size {
			return nil, status.Errorf(codes.DataLoss, "result of %s: chunk at offset %d, expected offset %d", name, off, size)
		}
		if size+int64(len(chunk.GetData())) > total {
			return nil, status.Errorf(codes.DataLoss, "result of %s: chunk at offset %d of %d bytes runs past the total size %d", name, off, len(chunk.GetData()), total)
		}
		buf = append(buf, chunk.GetData()...)
	}
	if first {
		return nil, status.Errorf(codes.DataLoss, "result of %s: the stream holds no chunk", name)
	}
	if int64(len(buf)) != total {
		return nil, status.Errorf(codes.DataLoss, "result of %s: the stream ended after %d of %d bytes", name, len(buf), total)
	}
	newMsg, ok := resultTypes[protoreflect.FullName(typ)]
	if !ok {
		return nil, status.Errorf(codes.Unimplemented, "result of %s: this client does not know the result type %q", name, typ)
	}
	msg := newMsg()
	if err := proto.Unmarshal(buf, msg); err != nil {
		return nil, status.Errorf(codes.DataLoss, "result of %s: %v", name, err)
	}
	return msg, nil
}

// InlineResult returns the result that travels inside job, or nil when it
// has none (not succeeded, or too large: see Job.result_size_bytes).
func InlineResult(job *frustumv1.Job) proto.Message {
	if r := job.GetSpectrumResult(); r != nil {
		return r
	}
	if r := job.GetThermoResult(); r != nil {
		return r
	}
	if r := job.GetMagnetizationResult(); r != nil {
		return r
	}
	if r := job.GetFitResult(); r != nil {
		return r
	}
	return nil
}
