// Package link holds what both ends of the coordinator–worker protocol must agree
// on beyond the messages themselves: the largest message either side sends or accepts,
// and how a PEM file of CA certificates is read for TLS.
package link

import (
	"crypto/x509"
	"fmt"
	"os"
)

// MaxMessageBytes bounds every gRPC message in both directions; the coordinator plans
// each task's result to stay well below it.
const MaxMessageBytes = 32 << 20

// LoadCAPool reads a PEM file of CA certificates.
func LoadCAPool(path string) (*x509.CertPool, error) {
	pem, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read CA file: %w", err)
	}
	pool := x509.NewCertPool()
	if !pool.AppendCertsFromPEM(pem) {
		return nil, fmt.Errorf("%s holds no PEM certificate", path)
	}
	return pool, nil
}
