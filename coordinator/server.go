package coordinator

import (
	"context"
	"crypto/subtle"
	"crypto/tls"
	"fmt"
	"net"
	"os"
	"strings"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	pb "bbmx/proto/bbmx/v1"
	"bbmx/proto/link"
)

// TLSFiles names the PEM files of the transport's TLS set-up. Empty CertFile means
// plaintext (fine on loopback; anywhere else use TLS).
type TLSFiles struct {
	CertFile, KeyFile string
	ClientCAFile      string // if set, clients must present a certificate signed by it
}

// ServerTLS loads the server side of a TLS set-up.
func ServerTLS(f TLSFiles) (*tls.Config, error) {
	if f.CertFile == "" && f.KeyFile == "" {
		if f.ClientCAFile != "" {
			return nil, fmt.Errorf("a client CA needs TLS: give the server certificate and key too")
		}
		return nil, nil
	}
	if f.CertFile == "" || f.KeyFile == "" {
		return nil, fmt.Errorf("TLS needs both a certificate and a key file")
	}
	cert, err := tls.LoadX509KeyPair(f.CertFile, f.KeyFile)
	if err != nil {
		return nil, fmt.Errorf("load TLS certificate: %w", err)
	}
	cfg := &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	if f.ClientCAFile != "" {
		pool, err := link.LoadCAPool(f.ClientCAFile)
		if err != nil {
			return nil, err
		}
		cfg.ClientCAs, cfg.ClientAuth = pool, tls.RequireAndVerifyClientCert
	}
	return cfg, nil
}

// ReadToken reads a shared token file: the first line, trimmed; it must be at least 16
// characters so a guessable token is refused.
func ReadToken(path string) (string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return "", fmt.Errorf("read token file: %w", err)
	}
	tok := strings.TrimSpace(strings.SplitN(string(b), "\n", 2)[0])
	if len(tok) < 16 {
		return "", fmt.Errorf("token in %s is shorter than 16 characters (make one with 'bbmx secrets init')", path)
	}
	return tok, nil
}

// NewServer wraps the coordinator in a gRPC server that requires the token on every
// call (except the standard health service) and bounds message sizes.
func NewServer(c *Coordinator, token string, tlsCfg *tls.Config) *grpc.Server {
	check := func(ctx context.Context, method string) error {
		if strings.HasPrefix(method, "/grpc.health.v1.Health/") {
			return nil
		}
		md, _ := metadata.FromIncomingContext(ctx)
		for _, v := range md.Get("authorization") {
			got, ok := strings.CutPrefix(v, "Bearer ")
			if ok && subtle.ConstantTimeCompare([]byte(got), []byte(token)) == 1 {
				return nil
			}
		}
		return status.Error(codes.Unauthenticated, "missing or wrong token")
	}
	opts := []grpc.ServerOption{
		grpc.MaxRecvMsgSize(link.MaxMessageBytes), grpc.MaxSendMsgSize(link.MaxMessageBytes),
		grpc.UnaryInterceptor(func(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
			if err := check(ctx, info.FullMethod); err != nil {
				return nil, err
			}
			return h(ctx, req)
		}),
		grpc.StreamInterceptor(func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
			if err := check(ss.Context(), info.FullMethod); err != nil {
				return err
			}
			return h(srv, ss)
		}),
	}
	if tlsCfg != nil {
		opts = append(opts, grpc.Creds(credentials.NewTLS(tlsCfg)))
	}
	s := grpc.NewServer(opts...)
	pb.RegisterCoordinatorServer(s, transport{c: c})
	hs := health.NewServer()
	hs.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	hs.SetServingStatus(pb.Coordinator_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_SERVING)
	healthpb.RegisterHealthServer(s, hs)
	return s
}

// transport adapts the Coordinator to the generated server interface.
type transport struct {
	pb.UnimplementedCoordinatorServer
	c *Coordinator
}

func (t transport) Register(ctx context.Context, r *pb.RegisterRequest) (*pb.RegisterReply, error) {
	return t.c.Register(ctx, r)
}
func (t transport) Lease(ctx context.Context, r *pb.LeaseRequest) (*pb.LeaseReply, error) {
	return t.c.Lease(ctx, r)
}
func (t transport) Heartbeat(ctx context.Context, r *pb.HeartbeatRequest) (*pb.HeartbeatReply, error) {
	return t.c.Heartbeat(ctx, r)
}
func (t transport) Submit(ctx context.Context, r *pb.SubmitRequest) (*pb.SubmitReply, error) {
	return t.c.Submit(ctx, r)
}
func (t transport) Release(ctx context.Context, r *pb.ReleaseRequest) (*pb.ReleaseReply, error) {
	return t.c.Release(ctx, r)
}
func (t transport) Status(ctx context.Context, r *pb.StatusRequest) (*pb.StatusReply, error) {
	return t.c.Status(ctx, r)
}

// Listen opens the coordinator's listening socket. An address without a host means
// loopback: listening on other interfaces must be asked for explicitly.
func Listen(addr string) (net.Listener, error) {
	if strings.HasPrefix(addr, ":") {
		addr = "127.0.0.1" + addr
	}
	return net.Listen("tcp", addr)
}
