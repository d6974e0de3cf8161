package link

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestLoadCAPoolErrors: a missing file and a file with no PEM certificate are refused
// with messages that say which.
func TestLoadCAPoolErrors(t *testing.T) {
	dir := t.TempDir()
	if _, err := LoadCAPool(filepath.Join(dir, "absent.pem")); err == nil || !strings.Contains(err.Error(), "read CA file") {
		t.Errorf("missing file: %v", err)
	}
	junk := filepath.Join(dir, "junk.pem")
	if err := os.WriteFile(junk, []byte("not a certificate\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := LoadCAPool(junk); err == nil || !strings.Contains(err.Error(), "holds no PEM certificate") {
		t.Errorf("junk file: %v", err)
	}
}
