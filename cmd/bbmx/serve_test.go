package main

import (
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// serve that cannot listen (port in use, address mistyped) fails with one line naming
// the flag and leaves no store and no address file. Before, it made an empty store
// first, and a metrics port in use left an address file pointing at nothing.
func TestServeCannotListenLeavesNothing(t *testing.T) {
	dir, sw, tok := setupWith(t, tinySweep)
	busy, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer busy.Close()
	store, addrFile := filepath.Join(dir, "s.db"), filepath.Join(dir, "addr")
	for _, c := range []struct{ flag, want string }{
		{"--listen", busy.Addr().String()},
		{"--listen", "no-port-here"},
		{"--metrics-listen", busy.Addr().String()},
	} {
		args := []string{"serve", sw, "--store", store, "--token-file", tok, "--address-file", addrFile, "--listen", "127.0.0.1:0", c.flag, c.want}
		code, _, errs := runCLI(t, args...)
		if code != 1 || !strings.Contains(errs, c.flag+":") || strings.Count(strings.TrimSpace(errs), "\n") > 0 {
			t.Errorf("%s %s: exit %d: %s", c.flag, c.want, code, errs)
		}
		for _, p := range []string{store, addrFile} {
			if _, err := os.Stat(p); err == nil {
				t.Errorf("%s %s: left %s behind", c.flag, c.want, p)
				os.Remove(p)
			}
		}
	}
}
