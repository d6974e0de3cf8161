package worker

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/status"

	pb "bbmx/proto/bbmx/v1"
)

// authority is a test certificate authority that writes what it signs as PEM files.
type authority struct {
	dir  string
	cert *x509.Certificate
	key  *ecdsa.PrivateKey
	file string // the CA certificate's PEM file
}

func newAuthority(t *testing.T, name string) *authority {
	t.Helper()
	a := &authority{dir: t.TempDir()}
	a.cert, a.key, a.file = a.sign(t, name, &x509.Certificate{IsCA: true, BasicConstraintsValid: true,
		KeyUsage: x509.KeyUsageCertSign}, nil, nil)
	return a
}

// issue signs a leaf certificate for loopback and returns its certificate and key files.
func (a *authority) issue(t *testing.T, name string, usage x509.ExtKeyUsage) (certFile, keyFile string) {
	t.Helper()
	_, key, certFile := a.sign(t, name, &x509.Certificate{ExtKeyUsage: []x509.ExtKeyUsage{usage},
		DNSNames: []string{"localhost"}, IPAddresses: []net.IP{net.IPv4(127, 0, 0, 1)},
		KeyUsage: x509.KeyUsageDigitalSignature}, a.cert, a.key)
	der, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	keyFile = filepath.Join(a.dir, name+".key")
	writePEM(t, keyFile, "EC PRIVATE KEY", der)
	return certFile, keyFile
}

func (a *authority) sign(t *testing.T, name string, tmpl, parent *x509.Certificate, parentKey *ecdsa.PrivateKey) (*x509.Certificate, *ecdsa.PrivateKey, string) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl.SerialNumber = big.NewInt(time.Now().UnixNano())
	tmpl.Subject = pkix.Name{CommonName: name}
	tmpl.NotBefore, tmpl.NotAfter = time.Now().Add(-time.Hour), time.Now().Add(time.Hour)
	if parent == nil {
		parent, parentKey = tmpl, key
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, parent, &key.PublicKey, parentKey)
	if err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(a.dir, name+".crt")
	writePEM(t, file, "CERTIFICATE", der)
	return cert, key, file
}

func writePEM(t *testing.T, path, kind string, der []byte) {
	t.Helper()
	if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: kind, Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
}

// serveTransport serves a coordinator with no methods (every call is Unimplemented once
// the transport works) over creds (nil: plaintext) on loopback.
func serveTransport(t *testing.T, creds credentials.TransportCredentials) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	var opts []grpc.ServerOption
	if creds != nil {
		opts = append(opts, grpc.Creds(creds))
	}
	s := grpc.NewServer(opts...)
	pb.RegisterCoordinatorServer(s, unimplemented{})
	go s.Serve(ln)
	t.Cleanup(s.Stop)
	return ln.Addr().String()
}

// TestTransportMismatchIsNamed: a worker whose transport set-up does not match the
// coordinator's (TLS against plaintext either way, a CA that does not verify the
// coordinator, a client certificate the coordinator refuses) gets an error saying which
// on its first call, one Run does not retry, instead of Unavailable, which Run retries
// for ten minutes; a coordinator that is down stays Unavailable, and matching set-ups
// get through to the coordinator (Unimplemented here). Deterministic.
func TestTransportMismatchIsNamed(t *testing.T) {
	ca, other := newAuthority(t, "quillmoor-ca"), newAuthority(t, "elsewhere-ca")
	srvCert, srvKey := ca.issue(t, "coordinator", x509.ExtKeyUsageServerAuth)
	cliCert, cliKey := ca.issue(t, "worker", x509.ExtKeyUsageClientAuth)
	pair, err := tls.LoadX509KeyPair(srvCert, srvKey)
	if err != nil {
		t.Fatal(err)
	}
	pool := x509.NewCertPool()
	pool.AddCert(ca.cert)
	plain := serveTransport(t, nil)
	withTLS := serveTransport(t, credentials.NewTLS(&tls.Config{Certificates: []tls.Certificate{pair}, MinVersion: tls.VersionTLS12}))
	mutual := serveTransport(t, credentials.NewTLS(&tls.Config{Certificates: []tls.Certificate{pair}, MinVersion: tls.VersionTLS13,
		ClientAuth: tls.RequireAndVerifyClientCert, ClientCAs: pool}))
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	down := ln.Addr().String()
	ln.Close()

	for _, tc := range []struct {
		name string
		addr string
		tls  TLSFiles
		code codes.Code // Unknown: not a gRPC status
		says string
	}{
		{"plaintext worker, TLS coordinator", withTLS, TLSFiles{}, codes.Unknown, "speaks TLS"},
		{"TLS worker, plaintext coordinator", plain, TLSFiles{CAFile: ca.file}, codes.Unknown, "does not speak TLS"},
		{"another CA", withTLS, TLSFiles{CAFile: other.file}, codes.Unknown, "does not verify"},
		{"no client certificate", mutual, TLSFiles{CAFile: ca.file}, codes.Unknown, "refused this worker's TLS handshake"},
		{"coordinator down, plaintext", down, TLSFiles{}, codes.Unavailable, ""},
		{"coordinator down, TLS", down, TLSFiles{CAFile: ca.file}, codes.Unavailable, ""},
		{"plaintext both", plain, TLSFiles{}, codes.Unimplemented, ""},
		{"TLS both", withTLS, TLSFiles{CAFile: ca.file}, codes.Unimplemented, ""},
		{"mutual TLS", mutual, TLSFiles{CAFile: ca.file, CertFile: cliCert, KeyFile: cliKey}, codes.Unimplemented, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cl, closeFn, err := Dial(tc.addr, "token-for-the-test", tc.tls)
			if err != nil {
				t.Fatal(err)
			}
			defer closeFn()
			ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
			defer cancel()
			_, err = cl.Register(ctx, &pb.RegisterRequest{})
			if status.Code(err) != tc.code || transient(err) != (tc.code == codes.Unavailable) || !strings.Contains(err.Error(), tc.says) {
				t.Fatalf("got %v, want %v saying %q", err, tc.code, tc.says)
			}
		})
	}
}
