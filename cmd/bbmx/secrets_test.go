package main

import (
	"bytes"
	"crypto/tls"
	"crypto/x509"
	"encoding/hex"
	"encoding/pem"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func parsePEMCert(t *testing.T, path string) *x509.Certificate {
	t.Helper()
	block, _ := pem.Decode([]byte(readFile(t, path)))
	if block == nil || block.Type != "CERTIFICATE" {
		t.Fatalf("%s: no PEM certificate", path)
	}
	c, err := x509.ParseCertificate(block.Bytes)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return c
}

// init writes every file 0600; the certificates chain to the CA for the names asked for
// and for the right uses; the token is 256 random bits.
func TestSecretsInitFiles(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "sec")
	code, out, errs := runCLI(t, "secrets", "init", dir, "--hosts", "head01.lab.example,10.1.2.3", "--days", "30")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(out, "--token-file "+filepath.Join(dir, "token")) || !strings.Contains(out, "--client-ca") {
		t.Fatalf("output does not say how to use the files:\n%s", out)
	}
	if fi, err := os.Stat(dir); err != nil || fi.Mode().Perm() != 0o700 {
		t.Fatalf("dir mode: %v %v", fi.Mode(), err)
	}
	for _, name := range secretFiles {
		fi, err := os.Stat(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		if fi.Mode().Perm() != 0o600 {
			t.Errorf("%s has mode %v, want 0600", name, fi.Mode().Perm())
		}
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != len(secretFiles) {
		t.Errorf("dir holds %d entries, want %d (temporary files left behind?)", len(ents), len(secretFiles))
	}
	tok := strings.TrimSpace(readFile(t, filepath.Join(dir, "token")))
	if b, err := hex.DecodeString(tok); err != nil || len(b) != 32 {
		t.Fatalf("token %q is not 32 bytes of hex", tok)
	}

	ca := parsePEMCert(t, filepath.Join(dir, "ca.crt"))
	if !ca.IsCA {
		t.Fatal("ca.crt is not a CA")
	}
	pool := x509.NewCertPool()
	pool.AddCert(ca)
	srv := parsePEMCert(t, filepath.Join(dir, "server.crt"))
	if d := srv.NotAfter.Sub(time.Now()); d < 29*24*time.Hour || d > 31*24*time.Hour {
		t.Errorf("server certificate expires in %v, want about 30 days", d)
	}
	host, _ := os.Hostname()
	for _, name := range []string{"head01.lab.example", "10.1.2.3", "bbmx-coordinator", "localhost", "127.0.0.1", "::1", strings.ToLower(host)} {
		if _, err := srv.Verify(x509.VerifyOptions{DNSName: name, Roots: pool, KeyUsages: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}); err != nil {
			t.Errorf("server certificate for %q: %v", name, err)
		}
	}
	if _, err := srv.Verify(x509.VerifyOptions{DNSName: "other.lab.example", Roots: pool}); err == nil {
		t.Error("server certificate verifies for a name it was not made for")
	}
	cli := parsePEMCert(t, filepath.Join(dir, "client.crt"))
	if _, err := cli.Verify(x509.VerifyOptions{Roots: pool, KeyUsages: []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth}}); err != nil {
		t.Errorf("client certificate for client auth: %v", err)
	}
	if _, err := cli.Verify(x509.VerifyOptions{Roots: pool, KeyUsages: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}); err == nil {
		t.Error("client certificate verifies as a server certificate")
	}
	// A second init makes an unrelated CA: its server certificate must not verify here.
	dir2 := filepath.Join(t.TempDir(), "other")
	if code, _, errs := runCLI(t, "secrets", "init", dir2); code != 0 {
		t.Fatal(errs)
	}
	foreign := parsePEMCert(t, filepath.Join(dir2, "server.crt"))
	if _, err := foreign.Verify(x509.VerifyOptions{DNSName: "localhost", Roots: pool}); err == nil {
		t.Error("a certificate from another init verifies against this CA")
	}
	if tok2 := strings.TrimSpace(readFile(t, filepath.Join(dir2, "token"))); tok2 == tok {
		t.Error("two inits made the same token")
	}
}

// handshake runs a TLS handshake over loopback between a server demanding client
// certificates from dir's CA and a client using cfg; it returns the client's error
// or the server's, whichever side fails.
func handshake(t *testing.T, dir string, clientCert bool) error {
	t.Helper()
	srvPair, err := tls.LoadX509KeyPair(filepath.Join(dir, "server.crt"), filepath.Join(dir, "server.key"))
	if err != nil {
		t.Fatal(err)
	}
	pool := x509.NewCertPool()
	if !pool.AppendCertsFromPEM([]byte(readFile(t, filepath.Join(dir, "ca.crt")))) {
		t.Fatal("ca.crt holds no certificate")
	}
	ln, err := tls.Listen("tcp", "127.0.0.1:0", &tls.Config{
		Certificates: []tls.Certificate{srvPair},
		ClientCAs:    pool,
		ClientAuth:   tls.RequireAndVerifyClientCert,
		MinVersion:   tls.VersionTLS13,
	})
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	srvErr := make(chan error, 1)
	go func() {
		c, err := ln.Accept()
		if err != nil {
			srvErr <- err
			return
		}
		defer c.Close()
		c.SetDeadline(time.Now().Add(10 * time.Second))
		if err := c.(*tls.Conn).Handshake(); err != nil {
			srvErr <- err
			return
		}
		// Echo one line so the client sees the server accepted it (in TLS 1.3 a refused
		// client certificate only shows on the client's first read).
		buf := make([]byte, 5)
		if _, err := io.ReadFull(c, buf); err != nil {
			srvErr <- err
			return
		}
		_, err = c.Write(buf)
		srvErr <- err
	}()
	cfg := &tls.Config{RootCAs: pool, ServerName: "localhost", MinVersion: tls.VersionTLS13}
	if clientCert {
		pair, err := tls.LoadX509KeyPair(filepath.Join(dir, "client.crt"), filepath.Join(dir, "client.key"))
		if err != nil {
			t.Fatal(err)
		}
		cfg.Certificates = []tls.Certificate{pair}
	}
	conn, err := tls.Dial("tcp", ln.Addr().String(), cfg)
	if err == nil {
		conn.SetDeadline(time.Now().Add(10 * time.Second))
		if _, err = conn.Write([]byte("hello")); err == nil {
			buf := make([]byte, 5)
			if _, err = io.ReadFull(conn, buf); err == nil && !bytes.Equal(buf, []byte("hello")) {
				t.Fatalf("echo %q", buf)
			}
		}
		conn.Close()
	}
	if e := <-srvErr; err == nil {
		err = e
	}
	return err
}

func TestSecretsMutualTLS(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "sec")
	if code, _, errs := runCLI(t, "secrets", "init", dir); code != 0 {
		t.Fatal(errs)
	}
	if err := handshake(t, dir, true); err != nil {
		t.Fatalf("mutual TLS with the client certificate: %v", err)
	}
	if err := handshake(t, dir, false); err == nil {
		t.Fatal("handshake without a client certificate succeeded against a server that demands one")
	}
}

// Existing files are never replaced without --force, and nothing is written then;
// bad flags are usage errors that write nothing.
func TestSecretsRefuses(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "sec")
	if code, _, errs := runCLI(t, "secrets", "init", dir); code != 0 {
		t.Fatal(errs)
	}
	before := map[string]string{}
	for _, name := range secretFiles {
		before[name] = readFile(t, filepath.Join(dir, name))
	}
	code, _, errs := runCLI(t, "secrets", "init", dir)
	if code != 1 || !strings.Contains(errs, "already holds") || !strings.Contains(errs, "--force") {
		t.Fatalf("second init: exit %d: %s", code, errs)
	}
	for _, name := range secretFiles {
		if readFile(t, filepath.Join(dir, name)) != before[name] {
			t.Fatalf("%s changed although init refused", name)
		}
	}
	// One existing file is enough to refuse, and the others are not created.
	dir2 := filepath.Join(t.TempDir(), "partial")
	os.MkdirAll(dir2, 0o700)
	os.WriteFile(filepath.Join(dir2, "client.key"), []byte("mine"), 0o600)
	if code, _, errs := runCLI(t, "secrets", "init", dir2); code != 1 || !strings.Contains(errs, "client.key") {
		t.Fatalf("partial dir: exit %d: %s", code, errs)
	}
	if ents, _ := os.ReadDir(dir2); len(ents) != 1 || readFile(t, filepath.Join(dir2, "client.key")) != "mine" {
		t.Fatalf("refused init touched the directory: %v", ents)
	}
	if code, _, errs := runCLI(t, "secrets", "init", dir, "--force"); code != 0 {
		t.Fatalf("--force: %s", errs)
	}
	if readFile(t, filepath.Join(dir, "token")) == before["token"] {
		t.Fatal("--force did not replace the token")
	}
	if err := handshake(t, dir, true); err != nil {
		t.Fatalf("after --force: %v", err)
	}

	bad := filepath.Join(t.TempDir(), "bad")
	for _, args := range [][]string{
		{"secrets"},
		{"secrets", "make", bad},
		{"secrets", "init"},
		{"secrets", "init", bad, "--days", "0"},
		{"secrets", "init", bad, "--hosts", "head01:7421"},
		{"secrets", "init", bad, "--hosts", "bad_name!"},
		{"secrets", "init", bad, "extra"},
	} {
		if code, _, errs := runCLI(t, args...); code != 2 || errs == "" {
			t.Errorf("%v: exit %d (%q), want a usage error", args, code, errs)
		}
	}
	if _, err := os.Stat(bad); !os.IsNotExist(err) {
		t.Error("a refused init created its directory")
	}
}

func TestCheckHostName(t *testing.T) {
	for _, h := range []string{"node7", "head01.lab.example", "*.pool.lab.example", "10.0.0.1", "fe80::1"} {
		if err := checkHostName(h); err != nil {
			t.Errorf("%q: %v", h, err)
		}
	}
	for _, h := range []string{"-node", "a..b", "node:80", "[::1]:80", "x y", strings.Repeat("a", 64)} {
		if err := checkHostName(h); err == nil {
			t.Errorf("%q accepted", h)
		}
	}
}

// secretHosts always adds loopback names and this machine's hostname, once each.
func TestSecretHosts(t *testing.T) {
	hs, err := secretHosts(" Head01 ,head01,10.1.2.3,")
	if err != nil {
		t.Fatal(err)
	}
	if hs[0] != "head01" || hs[1] != "10.1.2.3" {
		t.Fatalf("order: %v", hs)
	}
	seen := map[string]int{}
	for _, h := range hs {
		seen[h]++
	}
	for _, h := range []string{"bbmx-coordinator", "localhost", "127.0.0.1", "::1"} {
		if seen[h] != 1 {
			t.Errorf("%s appears %d times in %v", h, seen[h], hs)
		}
	}
	if seen["head01"] != 1 {
		t.Errorf("duplicates kept: %v", hs)
	}
}
