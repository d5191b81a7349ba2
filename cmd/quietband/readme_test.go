package main

import (
	"os"
	"regexp"
	"strings"
	"testing"
)

// Issue 18 (must show): README's Commands table matches the commands'
// --help: every command has a row, and every flag its --help lists (old
// names kept as aliases aside) appears in that row.
func TestReadmeCommandsTableMatchesHelp(t *testing.T) {
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	rows := map[string]string{}
	for _, line := range strings.Split(string(b), "\n") {
		if m := regexp.MustCompile("^\\| `quietband ([a-z]+)").FindStringSubmatch(line); m != nil {
			rows[m[1]] = line
		}
	}
	flagRe := regexp.MustCompile(`(?m)^  -(\S+)[^\n]*\n\s+(.*)$`)
	for name := range commands {
		row, ok := rows[name]
		if !ok {
			t.Errorf("README's Commands table has no row for %s", name)
			continue
		}
		out, _ := runCmd(t, name, "--help")
		for _, m := range flagRe.FindAllStringSubmatch(out, -1) {
			flag, help := m[1], m[2]
			if strings.HasPrefix(help, "the same as --") {
				continue // an older name
			}
			if !strings.Contains(row, "-"+flag) && !strings.Contains(row, "/"+flag) {
				t.Errorf("README's row for %s lacks --%s", name, flag)
			}
		}
	}
}
