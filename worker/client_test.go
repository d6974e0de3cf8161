package worker

import (
	"strings"
	"testing"
)

// An address without a port is refused before dialling: gRPC would take port 443 and
// retry it for as long as Wait allows.
func TestCheckAddress(t *testing.T) {
	for _, a := range []string{"head01:7421", "127.0.0.1:7421", "[::1]:7421", ":7421"} {
		if err := CheckAddress(a); err != nil {
			t.Errorf("%s: %v", a, err)
		}
	}
	for _, a := range []string{"head01", "head01:", "head01:http", "head01:0", "head01:70000", "a b:::", ""} {
		if err := CheckAddress(a); err == nil || !strings.Contains(err.Error(), "host:port") {
			t.Errorf("%q accepted (%v)", a, err)
		}
		if _, _, err := Dial(a, "token-for-the-test", TLSFiles{}); err == nil {
			t.Errorf("Dial(%q) accepted", a)
		}
	}
}
