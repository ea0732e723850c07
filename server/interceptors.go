package server

import (
	"context"
	"log/slog"
	"runtime/debug"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
)

// recoverUnary turns a panic in a handler into INTERNAL for that call.
func recoverUnary(log *slog.Logger) grpc.UnaryServerInterceptor {
	return func(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (resp any, err error) {
		defer func() {
			if v := recover(); v != nil {
				log.Error("handler panic", "method", info.FullMethod, "panic", v, "stack", string(debug.Stack()))
				resp, err = nil, statusError(codes.Internal, "INTERNAL", "internal error", nil)
			}
		}()
		return handler(ctx, req)
	}
}

// recoverStream turns a panic in a stream handler into INTERNAL.
func recoverStream(log *slog.Logger) grpc.StreamServerInterceptor {
	return func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) (err error) {
		defer func() {
			if v := recover(); v != nil {
				log.Error("handler panic", "method", info.FullMethod, "panic", v, "stack", string(debug.Stack()))
				err = statusError(codes.Internal, "INTERNAL", "internal error", nil)
			}
		}()
		return handler(srv, ss)
	}
}
