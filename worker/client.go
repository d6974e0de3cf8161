package worker

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"net"
	"strconv"
	"sync"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

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

// ErrSweepComplete is what a Resolver returns once the coordinator has said, where
// workers find its address, that the sweep is complete: calls then fail with it and Run
// returns as for a complete sweep.
var ErrSweepComplete = errors.New("the sweep is complete")

// Resolver says where the coordinator is now: host:port, "" while that is not known
// (the coordinator is down and has withdrawn its address), or ErrSweepComplete.
type Resolver func() (string, error)

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

// remote is the gRPC Client. With a resolver it follows a coordinator that restarts at
// another address: after a call finds the coordinator unreachable, the next call asks
// the resolver again and dials the new address if it changed.
type remote struct {
	token   string
	opts    []grpc.DialOption
	tlsCfg  *tls.Config // nil for plaintext
	resolve Resolver

	mu    sync.Mutex
	addr  string
	conn  *grpc.ClientConn
	c     pb.CoordinatorClient
	stale bool               // the last call found the coordinator unreachable
	old   []*grpc.ClientConn // replaced connections; calls may still be on them, so closed last
}

// Dial connects to a coordinator at addr (host:port). The connection is lazy:
// unreachable coordinators show up as transient errors that Run retries.
func Dial(addr, token string, f TLSFiles) (Client, func() error, error) {
	return dial(addr, token, f, nil)
}

// DialFollowing is Dial for a coordinator whose address may change while the worker
// runs, as when a batch scheduler restarts it on another node: resolve gives the first
// address and, whenever the coordinator is unreachable, the current one.
func DialFollowing(resolve Resolver, token string, f TLSFiles) (Client, func() error, error) {
	addr, err := resolve()
	if err != nil {
		return nil, nil, err
	}
	return dial(addr, token, f, resolve)
}

func dial(addr, token string, f TLSFiles, resolve Resolver) (Client, func() error, error) {
	if err := CheckAddress(addr); err != nil {
		return nil, nil, err
	}
	var creds credentials.TransportCredentials
	var tlsCfg *tls.Config
	if f.CAFile == "" && f.CertFile == "" {
		creds = insecure.NewCredentials()
	} else {
		cfg := &tls.Config{MinVersion: tls.VersionTLS12, ServerName: f.ServerName}
		tlsCfg = cfg
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
	r := &remote{token: token, resolve: resolve, tlsCfg: tlsCfg, opts: []grpc.DialOption{grpc.WithTransportCredentials(creds),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(link.MaxMessageBytes), grpc.MaxCallSendMsgSize(link.MaxMessageBytes))}}
	if err := r.connect(addr); err != nil {
		return nil, nil, err
	}
	return r, r.close, nil
}

// connect dials addr and makes it the connection new calls use; r.mu is held or r is new.
func (r *remote) connect(addr string) error {
	conn, err := grpc.NewClient(addr, r.opts...)
	if err != nil {
		return fmt.Errorf("coordinator address %q: %w", addr, err)
	}
	if r.conn != nil {
		r.old = append(r.old, r.conn)
	}
	r.addr, r.conn, r.c = addr, conn, pb.NewCoordinatorClient(conn)
	return nil
}

func (r *remote) close() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	for _, c := range r.old {
		c.Close()
	}
	return r.conn.Close()
}

// client returns the stub for the next call, first following the coordinator to a new
// address if the last call could not reach it.
func (r *remote) client() (pb.CoordinatorClient, error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.stale && r.resolve != nil {
		addr, err := r.resolve()
		if err != nil {
			return nil, err
		}
		// An address that does not parse is left for the next try: the file may be
		// being rewritten.
		if addr != "" && addr != r.addr && CheckAddress(addr) == nil {
			if err := r.connect(addr); err != nil {
				return nil, err
			}
		}
	}
	return r.c, nil
}

// call makes one authenticated call and notes whether the coordinator was reachable.
func call[Q, A any](r *remote, ctx context.Context, q Q, f func(pb.CoordinatorClient, context.Context, Q, ...grpc.CallOption) (A, error)) (A, error) {
	c, err := r.client()
	if err != nil {
		var zero A
		return zero, err
	}
	a, err := f(c, metadata.AppendToOutgoingContext(ctx, "authorization", "Bearer "+r.token), q)
	r.mu.Lock()
	r.stale = status.Code(err) == codes.Unavailable
	addr := r.addr
	r.mu.Unlock()
	if status.Code(err) == codes.Unavailable {
		if perr := probeTransport(ctx, addr, r.tlsCfg); perr != nil {
			err = perr // not a gRPC status: Run does not retry it
		}
	}
	return a, err
}

// probeTransport tells a coordinator that is down from one that is up but cannot talk
// with this worker: it speaks TLS and the worker was given no CA, or the other way
// round, or its certificate does not verify, or it refuses the worker's client
// certificate. gRPC reports each as Unavailable, which Run would retry for as long as
// Wait allows (ten minutes by default) before saying anything useful. The answer comes
// from a TLS handshake of its own over a fresh connection, read from the handshake's
// typed errors. It returns nil when the coordinator cannot be reached (it may be
// starting) or nothing is wrong with the transport.
func probeTransport(ctx context.Context, addr string, cfg *tls.Config) error {
	ctx, cancel := context.WithTimeout(ctx, 3*time.Second)
	defer cancel()
	var d net.Dialer
	conn, err := d.DialContext(ctx, "tcp", addr)
	if err != nil {
		return nil
	}
	defer conn.Close()
	if deadline, ok := ctx.Deadline(); ok {
		conn.SetDeadline(deadline)
	}
	var verify *tls.CertificateVerificationError
	var header tls.RecordHeaderError
	if cfg == nil {
		// A TLS server answers a ClientHello with its own; a plaintext gRPC server
		// answers with an HTTP/2 frame (not a TLS record) or closes.
		tc := tls.Client(conn, &tls.Config{InsecureSkipVerify: true, MinVersion: tls.VersionTLS12})
		if err := tc.HandshakeContext(ctx); err == nil || remoteAlert(err) {
			return fmt.Errorf("the coordinator at %s speaks TLS, and this worker was given no CA to check it with (--tls-ca)", addr)
		}
		return nil
	}
	c := cfg.Clone()
	if c.ServerName == "" {
		c.ServerName, _, _ = net.SplitHostPort(addr)
	}
	tc := tls.Client(conn, c)
	err = tc.HandshakeContext(ctx)
	if err == nil {
		// Under TLS 1.3 a refused client certificate shows only after the handshake,
		// as an alert on the first read; an accepting gRPC server sends its settings.
		var b [1]byte
		_, err = tc.Read(b[:])
	}
	switch {
	case errors.As(err, &verify):
		return fmt.Errorf("the coordinator at %s has a certificate this worker's CA does not verify: %v", addr, verify.Err)
	case errors.As(err, &header):
		return fmt.Errorf("the coordinator at %s does not speak TLS, and this worker was given TLS files: give both the same set-up", addr)
	case remoteAlert(err):
		return fmt.Errorf("the coordinator at %s refused this worker's TLS handshake (%v): its client certificate is missing or not signed by the coordinator's --client-ca", addr, err)
	}
	return nil
}

// remoteAlert reports whether err is a TLS alert sent by the other side (crypto/tls
// returns those as a net.OpError with Op "remote error").
func remoteAlert(err error) bool {
	var op *net.OpError
	return errors.As(err, &op) && op.Op == "remote error"
}

func (r *remote) Register(ctx context.Context, q *pb.RegisterRequest) (*pb.RegisterReply, error) {
	return call(r, ctx, q, pb.CoordinatorClient.Register)
}
func (r *remote) Lease(ctx context.Context, q *pb.LeaseRequest) (*pb.LeaseReply, error) {
	return call(r, ctx, q, pb.CoordinatorClient.Lease)
}
func (r *remote) Heartbeat(ctx context.Context, q *pb.HeartbeatRequest) (*pb.HeartbeatReply, error) {
	return call(r, ctx, q, pb.CoordinatorClient.Heartbeat)
}
func (r *remote) Submit(ctx context.Context, q *pb.SubmitRequest) (*pb.SubmitReply, error) {
	return call(r, ctx, q, pb.CoordinatorClient.Submit)
}
func (r *remote) Release(ctx context.Context, q *pb.ReleaseRequest) (*pb.ReleaseReply, error) {
	return call(r, ctx, q, pb.CoordinatorClient.Release)
}

// Status asks a coordinator for its progress.
func Status(ctx context.Context, cl Client) (*pb.StatusReply, error) {
	r, ok := cl.(*remote)
	if !ok {
		return nil, fmt.Errorf("status needs a remote coordinator")
	}
	return call(r, ctx, &pb.StatusRequest{}, pb.CoordinatorClient.Status)
}
