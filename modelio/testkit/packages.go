package testkit

import (
	"os/exec"
	"strings"
	"testing"
)

// Packages returns every package of the module (go list fovea/..., the
// same list as `go list ./...` at the root) with its transitive
// dependencies, as `go list -deps` would list them: import path → deps.
// It fails the test when the go command is missing or the list fails.
func Packages(t testing.TB) map[string][]string {
	t.Helper()
	out := goList(t, "-f", "{{.ImportPath}} {{join .Deps \" \"}}", "fovea/...")
	pkgs := map[string][]string{}
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		f := strings.Fields(line)
		if len(f) > 0 {
			pkgs[f[0]] = f[1:]
		}
	}
	if len(pkgs) == 0 {
		t.Fatalf("go list fovea/... listed no packages:\n%s", out)
	}
	return pkgs
}

// goList runs the go command's list with args and returns its output.
func goList(t testing.TB, args ...string) string {
	t.Helper()
	goBin, err := exec.LookPath("go")
	if err != nil {
		t.Fatalf("the go command is needed for this test: %v", err)
	}
	out, err := exec.Command(goBin, append([]string{"list"}, args...)...).Output()
	if err != nil {
		if ee, ok := err.(*exec.ExitError); ok {
			t.Fatalf("go list %s: %v\n%s", strings.Join(args, " "), err, ee.Stderr)
		}
		t.Fatalf("go list %s: %v", strings.Join(args, " "), err)
	}
	return string(out)
}
