package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// A coordinator address without a port is a usage error at once. gRPC took it as port
// 443, so a worker told --coordinator head01 retried that for the whole --wait (ten
// minutes by default) before failing with exit status 1.
func TestCoordinatorAddressIsChecked(t *testing.T) {
	tok := filepath.Join(t.TempDir(), "token")
	if err := os.WriteFile(tok, []byte("0123456789abcdef0123456789abcdef\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, args := range [][]string{
		{"work", "--coordinator", "localhost", "--token-file", tok, "--wait", "2s"},
		{"work", "--coordinator", "head01:http", "--token-file", tok, "--wait", "2s"},
		{"status", "--coordinator", "localhost", "--token-file", tok},
	} {
		start := time.Now()
		code, _, errs := runCLI(t, args...)
		if code != 2 || !strings.Contains(errs, "not host:port") || strings.Count(strings.TrimSpace(errs), "\n") > 0 {
			t.Errorf("%v: exit %d: %s", args, code, errs)
		}
		if time.Since(start) > 5*time.Second {
			t.Errorf("%v: took %v", args, time.Since(start))
		}
	}
}
