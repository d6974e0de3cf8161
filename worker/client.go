package worker

import (
	"context"
	"crypto/tls"
	"fmt"
	"net"
	"strconv"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/metadata"

	pb "bbmx/proto/bbmx/v1"
	"bbmx/proto/link"
)

// TLSFiles names a worker's TLS files. An empty CAFile with no client certificate
// means plaintext.
type TLSFiles struct {
	CAFile            string // CA that signed the coordinator's certificate
	CertFile, KeyFile string // client certificate, when the coordinator requires one
	ServerName        string // name to verify in the coordinator's certificate (default: the host dialled)
}

// CheckAddress refuses a coordinator address that is not host:port with a numeric port.
// Checked before dialling because gRPC would otherwise take a missing port as 443 and
// retry an address that cannot work for as long as Wait allows.
func CheckAddress(addr string) error {
	_, port, err := net.SplitHostPort(addr) // an empty host is this machine, as for net.Dial
	if err == nil {
		if p, perr := strconv.ParseUint(port, 10, 16); perr != nil || p == 0 {
			err = fmt.Errorf("port %q is not a number between 1 and 65535", port)
		}
	}
	if err != nil {
		return fmt.Errorf("coordinator address %q is not host:port (e.g. head01:7421): %v", addr, err)
	}
	return nil
}

// remote is the gRPC Client.
type remote struct {
	conn  *grpc.ClientConn
	c     pb.CoordinatorClient
	token string
}

// Dial connects to a coordinator at addr (host:port). The connection is lazy:
// unreachable coordinators show up as transient errors that Run retries.
func Dial(addr, token string, f TLSFiles) (Client, func() error, error) {
	if err := CheckAddress(addr); err != nil {
		return nil, nil, err
	}
	var creds credentials.TransportCredentials
	if f.CAFile == "" && f.CertFile == "" {
		creds = insecure.NewCredentials()
	} else {
		cfg := &tls.Config{MinVersion: tls.VersionTLS12, ServerName: f.ServerName}
		if f.CAFile != "" {
			pool, err := link.LoadCAPool(f.CAFile)
			if err != nil {
				return nil, nil, err
			}
			cfg.RootCAs = pool
		}
		if f.CertFile != "" || f.KeyFile != "" {
			cert, err := tls.LoadX509KeyPair(f.CertFile, f.KeyFile)
			if err != nil {
				return nil, nil, fmt.Errorf("load client certificate: %w", err)
			}
			cfg.Certificates = []tls.Certificate{cert}
		}
		creds = credentials.NewTLS(cfg)
	}
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(creds),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(link.MaxMessageBytes), grpc.MaxCallSendMsgSize(link.MaxMessageBytes)))
	if err != nil {
		return nil, nil, fmt.Errorf("coordinator address %q: %w", addr, err)
	}
	return &remote{conn: conn, c: pb.NewCoordinatorClient(conn), token: token}, conn.Close, nil
}

func (r *remote) auth(ctx context.Context) context.Context {
	return metadata.AppendToOutgoingContext(ctx, "authorization", "Bearer "+r.token)
}

func (r *remote) Register(ctx context.Context, q *pb.RegisterRequest) (*pb.RegisterReply, error) {
	return r.c.Register(r.auth(ctx), q)
}
func (r *remote) Lease(ctx context.Context, q *pb.LeaseRequest) (*pb.LeaseReply, error) {
	return r.c.Lease(r.auth(ctx), q)
}
func (r *remote) Heartbeat(ctx context.Context, q *pb.HeartbeatRequest) (*pb.HeartbeatReply, error) {
	return r.c.Heartbeat(r.auth(ctx), q)
}
func (r *remote) Submit(ctx context.Context, q *pb.SubmitRequest) (*pb.SubmitReply, error) {
	return r.c.Submit(r.auth(ctx), q)
}
func (r *remote) Release(ctx context.Context, q *pb.ReleaseRequest) (*pb.ReleaseReply, error) {
	return r.c.Release(r.auth(ctx), q)
}

// Status asks a coordinator for its progress.
func Status(ctx context.Context, cl Client) (*pb.StatusReply, error) {
	r, ok := cl.(*remote)
	if !ok {
		return nil, fmt.Errorf("status needs a remote coordinator")
	}
	return r.c.Status(r.auth(ctx), &pb.StatusRequest{})
}
