// Package deploy holds no Go code: its tests keep the deployment files (Slurm and PBS scripts,
// Kubernetes manifests, systemd units, READMEs) in step with the bbmx command line. They build
// the binary, read every subcommand's flags from its --help, and check that each bbmx command
// line written in deploy/ uses only subcommands and flags the binary accepts.
package deploy

import (
	"bytes"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"testing"

	"gopkg.in/yaml.v3"
)

var bbmxBin string // built once by TestMain

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "bbmx-deploy-test")
	if err != nil {
		panic(err)
	}
	bbmxBin = filepath.Join(dir, "bbmx")
	goTool := filepath.Join(runtime.GOROOT(), "bin", "go")
	if _, err := os.Stat(goTool); err != nil {
		goTool = "go"
	}
	build := exec.Command(goTool, "build", "-o", bbmxBin, "bbmx/cmd/bbmx")
	build.Stdout, build.Stderr = os.Stderr, os.Stderr
	if err := build.Run(); err != nil {
		os.RemoveAll(dir)
		panic("building bbmx: " + err.Error())
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// cli is what the binary accepts: subcommand -> flag names (without dashes).
type cli map[string]map[string]bool

var flagLine = regexp.MustCompile(`^  -([A-Za-z0-9][A-Za-z0-9-]*)`)

// readCLI lists the subcommands from 'bbmx help' and each one's flags from its --help, in
// Go's flag usage format ("  -name type" lines). "secrets" is read as "secrets init".
func readCLI(t *testing.T) cli {
	t.Helper()
	out, err := exec.Command(bbmxBin, "help").CombinedOutput()
	if err != nil {
		t.Fatalf("bbmx help: %v\n%s", err, out)
	}
	c := cli{}
	inList := false
	for _, l := range strings.Split(string(out), "\n") {
		if strings.HasPrefix(l, "Commands:") {
			inList = true
			continue
		}
		f := strings.Fields(l)
		if !inList || len(f) == 0 || !strings.HasPrefix(l, "  ") {
			continue
		}
		c[f[0]] = map[string]bool{}
	}
	for _, want := range []string{"serve", "work", "run", "merge", "plan", "status", "secrets", "export", "report", "show"} {
		if c[want] == nil {
			t.Fatalf("bbmx help does not list %q; the deploy files need it:\n%s", want, out)
		}
	}
	for name, flags := range c {
		args := []string{name, "--help"}
		if name == "secrets" {
			args = []string{"secrets", "init", "--help"}
		}
		help, err := exec.Command(bbmxBin, args...).CombinedOutput()
		if err != nil {
			t.Fatalf("bbmx %v: %v\n%s", args, err, help)
		}
		for _, l := range strings.Split(string(help), "\n") {
			if m := flagLine.FindStringSubmatch(l); m != nil {
				flags[m[1]] = true
			}
		}
		if name != "help" && len(flags) == 0 && (name == "serve" || name == "work") {
			t.Fatalf("no flags read from bbmx %s --help:\n%s", name, help)
		}
	}
	return c
}

// A use is one bbmx command line found in a file.
type use struct {
	where string   // file:line
	sub   string   // subcommand
	flags []string // flag names used, without dashes
}

// check reports every use of an unknown subcommand or flag.
func (c cli) check(t *testing.T, uses []use) {
	t.Helper()
	for _, u := range uses {
		flags, ok := c[u.sub]
		if !ok {
			t.Errorf("%s: bbmx has no subcommand %q", u.where, u.sub)
			continue
		}
		for _, f := range u.flags {
			if !flags[f] {
				t.Errorf("%s: bbmx %s has no flag --%s (it has: %s)", u.where, u.sub, f, strings.Join(sortedKeys(flags), ", "))
			}
		}
	}
}

func sortedKeys(m map[string]bool) []string {
	var ks []string
	for k := range m {
		ks = append(ks, "--"+k)
	}
	sort.Strings(ks)
	return ks
}

// flagName returns the name of a "--name" or "--name=value" token, or "".
func flagName(tok string) string {
	tok = strings.Trim(tok, `"'`)
	if !strings.HasPrefix(tok, "--") || len(tok) < 3 {
		return ""
	}
	name, _, _ := strings.Cut(tok[2:], "=")
	return name
}

// isBbmx tells whether a shell or unit token names the bbmx binary: the variable the
// scripts keep it in, the bare name, or a path to it. A quote opened in the token and not
// closed there ("bbmx ...) is a message, not a command.
func isBbmx(tok string) bool {
	switch tok {
	case "$BBMX", "${BBMX}", `"$BBMX"`, `"${BBMX}"`, "bbmx", "./bbmx":
		return true
	}
	return strings.HasSuffix(tok, "/bbmx") && !strings.ContainsAny(tok, "$*\"'")
}

var envAssign = regexp.MustCompile(`^[A-Za-z_][A-Za-z0-9_]*=`)

// commandPosition tells whether toks[j] is where a shell expects a command name (so a bare
// "bbmx" in a message is not taken for one).
func commandPosition(toks []string, j int) bool {
	if j == 0 {
		return true
	}
	prev := toks[j-1]
	switch prev {
	case "exec", ";", "&&", "||", "|", "then", "do", "else", "time", "!", "(", "$(":
		return true
	}
	return envAssign.MatchString(prev) && commandPosition(toks, j-1)
}

// stripComment drops a trailing shell comment (" # ...") from a code line.
func stripComment(l string) string {
	for _, sep := range []string{" # ", "\t# ", " #\t"} {
		if i := strings.Index(l, sep); i >= 0 {
			l = l[:i]
		}
	}
	return l
}

// joinContinuations joins lines ending in a backslash, keeping the number of the first.
func joinContinuations(text string) (lines []string, numbers []int) {
	var cur strings.Builder
	start := 0
	for i, l := range strings.Split(text, "\n") {
		if cur.Len() == 0 {
			start = i + 1
		}
		if strings.HasSuffix(l, `\`) {
			cur.WriteString(strings.TrimSuffix(l, `\`) + " ")
			continue
		}
		cur.WriteString(l)
		lines, numbers = append(lines, cur.String()), append(numbers, start)
		cur.Reset()
	}
	return lines, numbers
}

var (
	shellEnd   = map[string]bool{";": true, "|": true, "||": true, "&&": true, "&": true, ")": true}
	flagsArray = regexp.MustCompile(`\b([a-z]+)_flags\+?=\(([^)]*)\)`)
	arrayUse   = regexp.MustCompile(`^"?\$\{([a-z]+)_flags\[@\]\}"?$`)
)

// shellUses finds bbmx command lines in shell text: `"$BBMX" SUB --flag ...` (up to the end
// of the command), and arrays named SUB_flags that collect flags for SUB. In comment lines
// only known subcommands count (prose may say "a bbmx sweep"); in code any word after the
// binary must be a subcommand.
func shellUses(t *testing.T, c cli, name, text string, commentsToo bool) []use {
	var uses []use
	lines, numbers := joinContinuations(text)
	for i, l := range lines {
		where := name + ":" + strconv.Itoa(numbers[i])
		trimmed := strings.TrimSpace(l)
		comment := strings.HasPrefix(trimmed, "#")
		if comment && !commentsToo {
			continue
		}
		for _, m := range flagsArray.FindAllStringSubmatch(l, -1) {
			if _, ok := c[m[1]]; !ok {
				continue // srun_flags and the like belong to other programs
			}
			u := use{where: where, sub: m[1]}
			for _, tok := range strings.Fields(m[2]) {
				if f := flagName(tok); f != "" {
					u.flags = append(u.flags, f)
				}
			}
			uses = append(uses, u)
		}
		if !comment {
			trimmed = stripComment(trimmed)
		}
		toks := strings.Fields(strings.TrimLeft(trimmed, "# "))
		for j := 0; j+1 < len(toks); j++ {
			if !isBbmx(toks[j]) || !strings.Contains(toks[j], "$") && !commandPosition(toks, j) {
				continue
			}
			sub := strings.Trim(toks[j+1], `"'`)
			if _, known := c[sub]; !known && (comment || strings.HasPrefix(sub, "-") || sub == "") {
				continue
			}
			u := use{where: where, sub: sub}
			for _, tok := range toks[j+2:] {
				if shellEnd[tok] || strings.HasPrefix(tok, ">") || strings.HasPrefix(tok, "2>") {
					break
				}
				if m := arrayUse.FindStringSubmatch(tok); m != nil && m[1] != sub {
					t.Errorf("%s: bbmx %s is given the flags collected for %s", where, sub, m[1])
				}
				if f := flagName(tok); f != "" {
					u.flags = append(u.flags, f)
				}
			}
			uses = append(uses, u)
		}
	}
	return uses
}

func readFile(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func glob(t *testing.T, pattern string) []string {
	t.Helper()
	m, err := filepath.Glob(pattern)
	if err != nil || len(m) == 0 {
		t.Fatalf("no files match %s (%v)", pattern, err)
	}
	return m
}

// Every job script and helper uses only subcommands and flags bbmx accepts, passes bash -n,
// and each job script really runs bbmx.
func TestSchedulerScripts(t *testing.T) {
	c := readCLI(t)
	var files []string
	for _, p := range []string{"*.sh", "slurm/*.sbatch", "slurm/*.sh", "slurm/test/*.sh", "pbs/*.pbs", "pbs/*.sh"} {
		files = append(files, glob(t, p)...)
	}
	for _, f := range files {
		text := readFile(t, f)
		if bash, err := exec.LookPath("bash"); err == nil {
			if out, err := exec.Command(bash, "-n", f).CombinedOutput(); err != nil {
				t.Errorf("bash -n %s: %v\n%s", f, err, out)
			}
		}
		uses := shellUses(t, c, f, text, true)
		c.check(t, uses)
		if strings.HasSuffix(f, ".sbatch") || strings.HasSuffix(f, ".pbs") {
			if len(uses) == 0 {
				t.Errorf("%s: found no bbmx command line in a job script", f)
			}
			if !strings.Contains(text, "set -euo pipefail") {
				t.Errorf("%s: job scripts must stop on the first error (set -euo pipefail)", f)
			}
		}
	}
	// The scripts that start long-lived bbmx processes hand them the scheduler's signals.
	for _, f := range []string{"slurm/coordinator.sbatch", "slurm/workers.sbatch", "slurm/shards.sbatch",
		"pbs/coordinator.pbs", "pbs/workers.pbs", "pbs/shards.pbs"} {
		if !regexp.MustCompile(`(?m)^exec .*"\$BBMX" (serve|work|run) `).MatchString(readFile(t, f)) {
			t.Errorf("%s: bbmx must be started with exec so the scheduler's TERM reaches it", f)
		}
	}
	for _, f := range glob(t, "slurm/*.sbatch") {
		if f != filepath.Join("slurm", "merge.sbatch") && !strings.Contains(readFile(t, f), "#SBATCH --signal=") {
			t.Errorf("%s: no --signal directive: the job would be killed at the wall time without warning", f)
		}
	}
	// submit.sh shows the cost estimate (plan, from submit-common.sh) before it submits a
	// sweep in every mode that starts one.
	if !strings.Contains(readFile(t, "submit-common.sh"), `"$BBMX" plan "$BBMX_SWEEP"`) {
		t.Error("submit-common.sh: plan does not run bbmx plan")
	}
	for f, submit := range map[string]string{"slurm/submit.sh": "sbatch_id", "pbs/submit.sh": "qsub_id"} {
		text := readFile(t, f)
		if !strings.Contains(text, `source "$here/../submit-common.sh"`) {
			t.Errorf("%s: does not source submit-common.sh", f)
		}
		found := 0
		for _, mode := range []string{"coordinated", "shards", "allocation"} {
			_, body, ok := strings.Cut(text, "\n"+mode+")\n")
			if !ok {
				continue
			}
			found++
			body, _, _ = strings.Cut(body, ";;")
			p, s := strings.Index(body, "\tplan\n"), strings.Index(body, submit)
			if p < 0 || s < 0 || p > s {
				t.Errorf("%s: mode %s submits without showing the cost estimate first", f, mode)
			}
		}
		if found < 2 {
			t.Errorf("%s: found %d of the modes coordinated, shards, allocation", f, found)
		}
	}
}

// Fenced code in the READMEs uses only real subcommands and flags.
func TestReadmeCommands(t *testing.T) {
	c := readCLI(t)
	for _, f := range glob(t, "*/README.md") {
		checkReadme(t, c, f)
	}
	checkReadme(t, c, "README.md")
}

func checkReadme(t *testing.T, c cli, f string) {
	var code strings.Builder
	in := false
	for _, l := range strings.Split(readFile(t, f), "\n") {
		if strings.HasPrefix(strings.TrimSpace(l), "```") {
			in = !in
			code.WriteString("\n")
			continue
		}
		if in {
			code.WriteString(l)
		}
		code.WriteString("\n")
	}
	uses := shellUses(t, c, f, code.String(), false)
	if len(uses) == 0 {
		t.Errorf("%s: no bbmx command in its code blocks", f)
	}
	c.check(t, uses)
}

// manifests decodes every YAML document under k8s/.
func manifests(t *testing.T) map[string][]map[string]any {
	docs := map[string][]map[string]any{}
	for _, f := range glob(t, "k8s/*.yaml") {
		dec := yaml.NewDecoder(strings.NewReader(readFile(t, f)))
		for {
			var doc map[string]any
			err := dec.Decode(&doc)
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("%s: %v", f, err)
			}
			if doc != nil {
				docs[f] = append(docs[f], doc)
			}
		}
	}
	return docs
}

// get walks a decoded YAML tree by keys and indices.
func get(v any, path ...any) any {
	for _, p := range path {
		switch k := p.(type) {
		case string:
			m, ok := v.(map[string]any)
			if !ok {
				return nil
			}
			v = m[k]
		case int:
			s, ok := v.([]any)
			if !ok || k >= len(s) {
				return nil
			}
			v = s[k]
		}
	}
	return v
}

func str(v any) string { s, _ := v.(string); return s }

func strs(v any) []string {
	var out []string
	for _, x := range asList(v) {
		out = append(out, str(x))
	}
	return out
}

func asList(v any) []any { s, _ := v.([]any); return s }

// Every manifest parses; every container that runs bbmx uses only accepted subcommands and
// flags; and the objects refer to each other consistently.
func TestKubernetesManifests(t *testing.T) {
	c := readCLI(t)
	docs := manifests(t)
	byKind := map[string]map[string]any{} // kind/name -> object
	var uses []use
	var kustomization map[string]any
	for f, ds := range docs {
		for i, d := range ds {
			kind, name := str(d["kind"]), str(get(d, "metadata", "name"))
			if kind == "Kustomization" {
				kustomization = d
				continue
			}
			if str(d["apiVersion"]) == "" || kind == "" || name == "" {
				t.Errorf("%s document %d: apiVersion, kind and metadata.name are required", f, i+1)
				continue
			}
			byKind[kind+"/"+name] = d
			for j, ct := range asList(get(d, "spec", "template", "spec", "containers")) {
				argv := append(strs(get(ct, "command")), strs(get(ct, "args"))...)
				if len(argv) < 2 || !isBbmx(argv[0]) {
					t.Errorf("%s %s container %d does not run bbmx: %v", f, name, j, argv)
					continue
				}
				u := use{where: f + ": " + kind + "/" + name, sub: argv[1]}
				for _, a := range argv[2:] {
					if fl := flagName(a); fl != "" {
						u.flags = append(u.flags, fl)
					}
				}
				uses = append(uses, u)
				checkMounts(t, u.where, ct, argv)
			}
		}
	}
	if len(uses) < 2 {
		t.Fatalf("found %d bbmx containers in the manifests, want the coordinator and the workers", len(uses))
	}
	c.check(t, uses)

	dep, job, svc := byKind["Deployment/bbmx-coordinator"], byKind["Job/bbmx-workers"], byKind["Service/bbmx-coordinator"]
	if dep == nil || job == nil || svc == nil || byKind["PersistentVolumeClaim/bbmx-store"] == nil || byKind["ConfigMap/bbmx-sweep"] == nil {
		t.Fatalf("missing objects; have %v", sortedAny(byKind))
	}
	if n, _ := get(dep, "spec", "replicas").(int); n != 1 || str(get(dep, "spec", "strategy", "type")) != "Recreate" {
		t.Error("the coordinator must be exactly one pod, replaced with Recreate (one writer of the store)")
	}
	labels, _ := get(dep, "spec", "template", "metadata", "labels").(map[string]any)
	for k, v := range get(svc, "spec", "selector").(map[string]any) {
		if labels[k] != v {
			t.Errorf("the Service selects %s=%v, which the coordinator pods do not carry", k, v)
		}
	}
	// The workers dial the Service by name on its port, and check the certificate for it.
	wargs := strs(get(job, "spec", "template", "spec", "containers", 0, "args"))
	port := get(svc, "spec", "ports", 0, "port")
	if want := "bbmx-coordinator:" + itoaAny(port); argAfter(wargs, "--coordinator") != want {
		t.Errorf("workers dial %q, want the Service %q", argAfter(wargs, "--coordinator"), want)
	}
	if argAfter(wargs, "--tls-server-name") != "bbmx-coordinator" {
		t.Error("workers must check the certificate for bbmx-coordinator, the name bbmx secrets init puts in it")
	}
	dargs := strs(get(dep, "spec", "template", "spec", "containers", 0, "args"))
	if !strings.HasSuffix(argAfter(dargs, "--listen"), ":"+itoaAny(port)) {
		t.Errorf("coordinator listens on %q, the Service port is %v", argAfter(dargs, "--listen"), port)
	}
	// Every Secret, ConfigMap and claim the pods mount exists (the Secret from the generator).
	generated := map[string][]string{}
	for _, g := range asList(get(kustomization, "secretGenerator")) {
		generated[str(get(g, "name"))] = strs(get(g, "files"))
	}
	var resources []string
	for _, r := range strs(get(kustomization, "resources")) {
		resources = append(resources, filepath.Join("k8s", r))
	}
	for f := range docs {
		if filepath.Base(f) != "kustomization.yaml" && !contains(resources, f) {
			t.Errorf("%s is not listed in kustomization.yaml resources", f)
		}
	}
	for _, obj := range []map[string]any{dep, job} {
		for _, v := range asList(get(obj, "spec", "template", "spec", "volumes")) {
			if s := str(get(v, "secret", "secretName")); s != "" && generated[s] == nil {
				t.Errorf("volume %s mounts Secret %q, which kustomization.yaml does not generate", str(get(v, "name")), s)
			}
			if s := str(get(v, "configMap", "name")); s != "" && byKind["ConfigMap/"+s] == nil {
				t.Errorf("volume mounts ConfigMap %q, which is not defined", s)
			}
			if s := str(get(v, "persistentVolumeClaim", "claimName")); s != "" && byKind["PersistentVolumeClaim/"+s] == nil {
				t.Errorf("volume mounts claim %q, which is not defined", s)
			}
		}
	}
	for _, f := range generated["bbmx-secrets"] {
		if !contains([]string{"token", "ca.crt", "server.crt", "server.key", "client.crt", "client.key"}, filepath.Base(f)) {
			t.Errorf("secretGenerator file %s is not one bbmx secrets init writes", f)
		}
	}
	// The sweep in the ConfigMap is the cluster example, byte for byte.
	sweep := str(get(byKind["ConfigMap/bbmx-sweep"], "data", "sweep.toml"))
	if want := readFile(t, filepath.Join("..", "examples", "cluster.toml")); sweep != want {
		t.Error("k8s/sweep-configmap.yaml no longer holds examples/cluster.toml; copy it in again (indented by four spaces)")
	}
}

// checkMounts: every file a container's bbmx arguments name under /etc/bbmx or /var/lib/bbmx
// lies under one of the container's mount paths.
func checkMounts(t *testing.T, where string, ct any, argv []string) {
	var mounts []string
	for _, m := range asList(get(ct, "volumeMounts")) {
		mounts = append(mounts, str(get(m, "mountPath")))
	}
	for _, a := range argv {
		if !strings.HasPrefix(a, "/etc/bbmx/") && !strings.HasPrefix(a, "/var/lib/bbmx/") {
			continue
		}
		ok := false
		for _, m := range mounts {
			if strings.HasPrefix(a, m+"/") {
				ok = true
			}
		}
		if !ok {
			t.Errorf("%s: %s is under no volume mount (%v)", where, a, mounts)
		}
	}
}

func argAfter(args []string, flag string) string {
	for i := 0; i+1 < len(args); i++ {
		if args[i] == flag {
			return args[i+1]
		}
	}
	return ""
}

func itoaAny(v any) string {
	n, _ := v.(int)
	return strconv.Itoa(n)
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func sortedAny(m map[string]map[string]any) []string {
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	return ks
}

// The systemd units run only accepted bbmx command lines and pass systemd-analyze verify
// (or, where it is missing, a parse of their sections and keys).
func TestSystemdUnits(t *testing.T) {
	c := readCLI(t)
	units := glob(t, "systemd/*.service")
	var uses []use
	for _, f := range units {
		text := readFile(t, f)
		n := 0
		for i, l := range strings.Split(text, "\n") {
			v, ok := strings.CutPrefix(l, "ExecStart=")
			if !ok {
				continue
			}
			n++
			toks := strings.Fields(v)
			if len(toks) < 2 || !isBbmx(toks[0]) {
				t.Errorf("%s:%d: ExecStart does not run bbmx", f, i+1)
				continue
			}
			u := use{where: f + ":" + strconv.Itoa(i+1), sub: toks[1]}
			for _, tok := range toks[2:] {
				if fl := flagName(tok); fl != "" {
					u.flags = append(u.flags, fl)
				}
			}
			uses = append(uses, u)
		}
		if n != 1 {
			t.Errorf("%s: %d ExecStart lines, want 1", f, n)
		}
		parseUnit(t, f, text)
	}
	c.check(t, uses)

	analyze, err := exec.LookPath("systemd-analyze")
	if err != nil {
		t.Log("systemd-analyze not found: units were parsed, not verified")
		return
	}
	// verify needs the ExecStart binary to exist: point the copies at the one just built.
	dir := t.TempDir()
	var paths []string
	for _, f := range units {
		p := filepath.Join(dir, filepath.Base(f))
		text := strings.ReplaceAll(readFile(t, f), "/usr/local/bin/bbmx", bbmxBin)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		paths = append(paths, p)
	}
	cmd := exec.Command(analyze, append([]string{"verify"}, paths...)...)
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	err = cmd.Run()
	// verify exits 0 on unknown keys and bad values, only warning: any output is a failure.
	if err != nil || strings.TrimSpace(out.String()) != "" {
		t.Errorf("systemd-analyze verify: %v\n%s", err, out.String())
	}
}

// parseUnit checks the shape of a unit file: sections we use, Key=Value lines, and the
// hardening every bbmx unit carries.
func parseUnit(t *testing.T, f, text string) {
	section := ""
	keys := map[string]bool{}
	for i, l := range strings.Split(text, "\n") {
		l = strings.TrimSpace(l)
		switch {
		case l == "" || strings.HasPrefix(l, "#") || strings.HasPrefix(l, ";"):
		case strings.HasPrefix(l, "[") && strings.HasSuffix(l, "]"):
			section = l
			if !contains([]string{"[Unit]", "[Service]", "[Install]"}, section) {
				t.Errorf("%s:%d: unexpected section %s", f, i+1, section)
			}
		case section == "":
			t.Errorf("%s:%d: line outside any section", f, i+1)
		default:
			k, _, ok := strings.Cut(l, "=")
			if !ok || strings.TrimSpace(k) == "" || strings.ContainsAny(k, " \t") {
				t.Errorf("%s:%d: not a Key=Value line: %q", f, i+1, l)
			}
			keys[section+k] = true
		}
	}
	for _, k := range []string{"[Service]DynamicUser", "[Service]NoNewPrivileges", "[Service]ProtectSystem",
		"[Service]ProtectHome", "[Service]CapabilityBoundingSet", "[Service]SystemCallFilter", "[Service]LoadCredential",
		"[Service]Restart", "[Install]WantedBy"} {
		if !keys[k] {
			t.Errorf("%s: no %s", f, k)
		}
	}
}
