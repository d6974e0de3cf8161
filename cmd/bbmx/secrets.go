package main

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/hex"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	iofs "io/fs"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"time"
)

func init() {
	register(command{name: "secrets", summary: "make the shared token and TLS certificates for a coordinator and its workers", run: runSecrets})
}

// The files secrets init writes, in the order it writes them. Every one is mode 0600.
const (
	secretToken      = "token"
	secretCACert     = "ca.crt"
	secretServerCert = "server.crt"
	secretServerKey  = "server.key"
	secretClientCert = "client.crt"
	secretClientKey  = "client.key"
)

// coordinatorName is in every server certificate, so workers can check the certificate with
// --tls-server-name when the coordinator's node is not known in advance (a batch job) or
// when it is reached through a service of that name (Kubernetes).
const coordinatorName = "bbmx-coordinator"

var secretFiles = []string{secretToken, secretCACert, secretServerCert, secretServerKey, secretClientCert, secretClientKey}

func runSecrets(args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		return usagef("name an action: bbmx secrets init DIR [--hosts h1,h2,...] [--days N] [--force]")
	}
	if args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		fmt.Fprintln(stdout, "Usage: bbmx secrets init DIR [--hosts h1,h2,...] [--days N] [--force]")
		fmt.Fprintln(stdout, "\nRun 'bbmx secrets init --help' for the details.")
		return nil
	}
	if args[0] != "init" {
		return usagef("unknown action %q (the only action is init)", args[0])
	}
	return runSecretsInit(args[1:], stdout, stderr)
}

func runSecretsInit(args []string, stdout, stderr io.Writer) error {
	fs := newFlagSet("secrets init", "DIR [--hosts h1,h2,...] [--days N] [--force]",
		"Writes into DIR (created 0700 if missing) everything a coordinator and its workers need to\n"+
			"talk securely, each file mode 0600:\n"+
			"  token                    random shared token (256 bits, hex) for --token-file\n"+
			"  ca.crt                   a new self-signed certificate authority (ECDSA P-256)\n"+
			"  server.crt, server.key   the coordinator's certificate, valid for the --hosts names, this\n"+
			"                           machine's hostname, localhost, 127.0.0.1, ::1 and the fixed name\n"+
			"                           bbmx-coordinator (for workers that cannot know the coordinator's node\n"+
			"                           in advance: they pass --tls-server-name bbmx-coordinator)\n"+
			"  client.crt, client.key   a worker certificate, for coordinators that demand client certificates\n"+
			"The authority's private key is used once and never written, so nobody can mint more\n"+
			"certificates from it: to add a host, run init again (with --force) and hand out the new files.\n"+
			"Existing files are never overwritten unless --force is given.")
	hostsFlag := fs.String("hosts", "", "comma-separated host names or IP addresses the coordinator is reached by")
	days := fs.Int("days", 365, "days the certificates stay valid")
	force := fs.Bool("force", false, "overwrite files that already exist in DIR")
	dir, err := positionalArg(fs, args, "name the directory to write the secrets into")
	if err != nil {
		return err
	}
	if *days < 1 || *days > 3650 {
		return usagef("--days must be between 1 and 3650, got %d", *days)
	}
	hosts, err := secretHosts(*hostsFlag)
	if err != nil {
		return err
	}

	if err := os.MkdirAll(dir, 0o700); err != nil {
		return err
	}
	if !*force {
		var present []string
		for _, name := range secretFiles {
			if _, err := os.Lstat(filepath.Join(dir, name)); err == nil {
				present = append(present, name)
			} else if !errors.Is(err, iofs.ErrNotExist) {
				return err
			}
		}
		if len(present) > 0 {
			return fmt.Errorf("%s already holds %s; nothing was written (use --force to replace them)",
				dir, strings.Join(present, ", "))
		}
	}

	files, err := makeSecrets(hosts, time.Duration(*days)*24*time.Hour, time.Now())
	if err != nil {
		return err
	}
	for _, name := range secretFiles {
		if err := writeSecret(filepath.Join(dir, name), files[name], *force); err != nil {
			return err
		}
	}

	fmt.Fprintf(stdout, "wrote to %s (each file mode 0600):\n", dir)
	for _, name := range secretFiles {
		fmt.Fprintf(stdout, "  %s\n", filepath.Join(dir, name))
	}
	fmt.Fprintf(stdout, "server certificate valid for %d days for: %s\n", *days, strings.Join(hosts, ", "))
	p := func(name string) string { return filepath.Join(dir, name) }
	fmt.Fprintf(stdout, "\nCoordinator (token, TLS, and client certificates required):\n"+
		"  bbmx serve SWEEP.toml --store STORE --listen 0.0.0.0:7421 --token-file %s \\\n"+
		"      --tls-cert %s --tls-key %s --client-ca %s\n",
		p(secretToken), p(secretServerCert), p(secretServerKey), p(secretCACert))
	fmt.Fprintf(stdout, "Worker (copy token, ca.crt, client.crt and client.key to it; keep them 0600):\n"+
		"  bbmx work --coordinator %s:7421 --token-file %s \\\n"+
		"      --tls-ca %s --tls-cert %s --tls-key %s\n",
		hosts[0], p(secretToken), p(secretCACert), p(secretClientCert), p(secretClientKey))
	fmt.Fprintln(stdout, "Leave out --client-ca (serve) and --tls-cert/--tls-key (work) for TLS without client certificates.")
	return nil
}

// secretHosts parses --hosts and adds the names a coordinator is always reachable by.
// The first name is the one to give workers.
func secretHosts(list string) ([]string, error) {
	var hosts []string
	seen := map[string]bool{}
	add := func(h string) {
		if !seen[h] {
			seen[h] = true
			hosts = append(hosts, h)
		}
	}
	for _, h := range strings.Split(list, ",") {
		h = strings.TrimSpace(h)
		if h == "" {
			continue
		}
		if err := checkHostName(h); err != nil {
			return nil, err
		}
		add(strings.ToLower(h))
	}
	if name, err := os.Hostname(); err == nil && checkHostName(name) == nil {
		add(strings.ToLower(name))
	}
	for _, h := range []string{coordinatorName, "localhost", "127.0.0.1", "::1"} {
		add(h)
	}
	return hosts, nil
}

// checkHostName accepts an IP address or a DNS name (letters, digits, '-', '.', and a
// leading "*." wildcard), and explains what is wrong otherwise.
func checkHostName(h string) error {
	if net.ParseIP(h) != nil {
		return nil
	}
	if _, _, err := net.SplitHostPort(h); err == nil {
		return usagef("--hosts takes host names without ports, got %q", h)
	}
	name := strings.TrimPrefix(h, "*.")
	if len(name) > 253 {
		return usagef("--hosts: %q is longer than a DNS name may be", h)
	}
	for _, label := range strings.Split(name, ".") {
		if label == "" || len(label) > 63 || label[0] == '-' || label[len(label)-1] == '-' {
			return usagef("--hosts: %q is not a valid host name or IP address", h)
		}
		for _, r := range label {
			if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-') {
				return usagef("--hosts: %q is not a valid host name or IP address", h)
			}
		}
	}
	return nil
}

// makeSecrets returns the contents of every secret file: the token, a fresh CA, and a
// server and a client certificate signed by it, valid from an hour before now (clock skew
// between nodes) for the given duration.
func makeSecrets(hosts []string, valid time.Duration, now time.Time) (map[string][]byte, error) {
	tok := make([]byte, 32)
	if _, err := rand.Read(tok); err != nil {
		return nil, err
	}
	files := map[string][]byte{secretToken: []byte(hex.EncodeToString(tok) + "\n")}

	notBefore, notAfter := now.Add(-time.Hour), now.Add(valid)
	caKey, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		return nil, err
	}
	caTmpl := &x509.Certificate{
		Subject:               pkix.Name{CommonName: "bbmx sweep authority", Organization: []string{"bbmx"}},
		NotBefore:             notBefore,
		NotAfter:              notAfter,
		KeyUsage:              x509.KeyUsageCertSign | x509.KeyUsageCRLSign | x509.KeyUsageDigitalSignature,
		BasicConstraintsValid: true,
		IsCA:                  true,
		MaxPathLenZero:        true,
	}
	caDER, caCert, err := signCert(caTmpl, nil, &caKey.PublicKey, caKey)
	if err != nil {
		return nil, err
	}
	files[secretCACert] = pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: caDER})

	leaf := func(cn string, usage x509.ExtKeyUsage, names []string, certName, keyName string) error {
		key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
		if err != nil {
			return err
		}
		tmpl := &x509.Certificate{
			Subject:     pkix.Name{CommonName: cn, Organization: []string{"bbmx"}},
			NotBefore:   notBefore,
			NotAfter:    notAfter,
			KeyUsage:    x509.KeyUsageDigitalSignature,
			ExtKeyUsage: []x509.ExtKeyUsage{usage},
		}
		for _, h := range names {
			if ip := net.ParseIP(h); ip != nil {
				tmpl.IPAddresses = append(tmpl.IPAddresses, ip)
			} else {
				tmpl.DNSNames = append(tmpl.DNSNames, h)
			}
		}
		der, _, err := signCert(tmpl, caCert, &key.PublicKey, caKey)
		if err != nil {
			return err
		}
		keyDER, err := x509.MarshalPKCS8PrivateKey(key)
		if err != nil {
			return err
		}
		files[certName] = pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der})
		files[keyName] = pem.EncodeToMemory(&pem.Block{Type: "PRIVATE KEY", Bytes: keyDER})
		return nil
	}
	if err := leaf("bbmx coordinator", x509.ExtKeyUsageServerAuth, hosts, secretServerCert, secretServerKey); err != nil {
		return nil, err
	}
	if err := leaf("bbmx worker", x509.ExtKeyUsageClientAuth, nil, secretClientCert, secretClientKey); err != nil {
		return nil, err
	}
	return files, nil
}

// signCert gives tmpl a random 128-bit serial number and signs it with key, by parent
// (or by itself when parent is nil).
func signCert(tmpl, parent *x509.Certificate, pub *ecdsa.PublicKey, key *ecdsa.PrivateKey) ([]byte, *x509.Certificate, error) {
	serial, err := rand.Int(rand.Reader, new(big.Int).Lsh(big.NewInt(1), 128))
	if err != nil {
		return nil, nil, err
	}
	tmpl.SerialNumber = serial
	if parent == nil {
		parent = tmpl
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, parent, pub, key)
	if err != nil {
		return nil, nil, err
	}
	cert, err := x509.ParseCertificate(der)
	return der, cert, err
}

// writeSecret writes data to path with mode 0600 through a temporary file and a rename,
// so a reader never sees half a key. Without force an existing path is left alone.
func writeSecret(path string, data []byte, force bool) error {
	return writeViaTemp(path, data, 0o600, force)
}

// writeViaTemp writes data with the given mode to a temporary file beside path, syncs
// it, and then renames it over path (replace) or links it to path, which fails if path
// exists, so a file that appeared since a check is never replaced. Readers never see
// half a file.
func writeViaTemp(path string, data []byte, mode os.FileMode, replace bool) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	if err := tmp.Chmod(mode); err != nil {
		tmp.Close()
		return err
	}
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	if replace {
		return os.Rename(tmp.Name(), path)
	}
	if err := os.Link(tmp.Name(), path); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}
