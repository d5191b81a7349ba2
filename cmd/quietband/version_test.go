package main

import (
	"strings"
	"testing"

	"quietband/metrics"
)

// Issue 18 item 9: no --version (build_info said (devel)/unknown), and
// 'quietband help run' showed the top-level help. --version prints the
// stamped or recorded version and revision (the same build_info carries),
// saying "devel"/"unknown" where the build recorded none; 'help CMD' is
// 'CMD --help'.
func TestVersionAndHelpCommand(t *testing.T) {
	v, r := metrics.Build()
	out, code := runCmd(t, "--version")
	if code != 0 || !strings.HasPrefix(out, "quietband "+v+" (revision "+r) || v == "" || r == "" || v == "(devel)" {
		t.Errorf("--version: %d %q (build %q %q)", code, out, v, r)
	}
	for _, c := range []string{"run", "replay", "report", "verify", "bench", "demo", "synth", "info"} {
		out, code := runCmd(t, "help", c)
		if code != 0 || !strings.Contains(out, "Usage: quietband "+c+" ") {
			t.Errorf("help %s: %d\n%s", c, code, out)
		}
	}
	metrics.Version, metrics.Revision = "v1.2.3", "abc123"
	defer func() { metrics.Version, metrics.Revision = "", "" }()
	if out, _ := runCmd(t, "--version"); !strings.HasPrefix(out, "quietband v1.2.3 (revision abc123") {
		t.Errorf("stamped --version: %q", out)
	}
}
