package engine

import (
	"os/exec"
	"regexp"
	"strings"
	"testing"
)

// TestNoFusedMultiplyAdd: the Go specification lets the compiler fuse x*y + z into one
// instruction that rounds once, and it does so on arm64, ppc64le and s390x, and on amd64
// built with GOAMD64=v3. A record would then depend on the machine and build it was
// made on, and stores from two clusters would conflict when merged. Every product that
// is added to something in the packages that make or keep records is therefore rounded
// by an explicit float64 conversion, which the specification says prevents fusion. This
// test compiles those packages for arm64 and fails if any fused instruction is emitted.
// It needs the go command (skipped in -short mode).
func TestNoFusedMultiplyAdd(t *testing.T) {
	if testing.Short() {
		t.Skip("compiles packages for arm64")
	}
	goCmd, err := exec.LookPath("go")
	if err != nil {
		t.Skip("no go command")
	}
	pkgs := []string{"bbmx/engine", "bbmx/engine/exactsum", "bbmx/engine/wire", "bbmx/results"}
	args := []string{"build", "-o", "/dev/null"}
	for _, p := range pkgs {
		args = append(args, "-gcflags="+p+"=-S")
	}
	cmd := exec.Command(goCmd, append(args, pkgs...)...)
	cmd.Env = append(cmd.Environ(), "GOARCH=arm64", "GOOS=linux", "CGO_ENABLED=0")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("go build for arm64: %v\n%s", err, out)
	}
	fused := regexp.MustCompile(`\b(FN?M(ADD|SUB)[SD])\b`)
	var hits []string
	fn := ""
	for _, line := range strings.Split(string(out), "\n") {
		if i := strings.Index(line, " STEXT"); i > 0 {
			fn = line[:i]
		}
		if fused.MatchString(line) {
			hits = append(hits, fn+": "+strings.TrimSpace(line))
		}
	}
	if len(strings.Split(string(out), "\n")) < 1000 {
		t.Fatalf("the compiler printed no assembly (%d bytes): the check would see nothing", len(out))
	}
	for _, h := range hits {
		t.Errorf("fused multiply-add: %s", h)
	}
}
