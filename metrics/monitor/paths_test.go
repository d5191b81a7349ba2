package monitor

import (
	"os"
	"path/filepath"
	"testing"
)

// TestWithin (issue 17, item 12): a folder reached through a symbolic link
// (the link itself, below it, or not made yet below it) is inside the
// folder the link points into.
func TestWithin(t *testing.T) {
	dir := t.TempDir()
	watched := filepath.Join(dir, "watched")
	os.MkdirAll(filepath.Join(watched, "sub"), 0o755)
	os.MkdirAll(filepath.Join(dir, "archive"), 0o755)
	os.Symlink(watched, filepath.Join(dir, "link"))
	os.Symlink(filepath.Join(watched, "sub"), filepath.Join(dir, "archive", "deep"))
	for _, c := range []struct {
		p    string
		want bool
	}{
		{filepath.Join(dir, "link"), true},
		{filepath.Join(dir, "link", "new", "folder"), true},
		{filepath.Join(dir, "archive", "deep", "x"), true},
		{filepath.Join(watched, "..", "watched", "y"), true},
		{filepath.Join(dir, "archive"), false},
		{filepath.Join(dir, "watched2"), false},
		{dir, false},
	} {
		if got := Within(c.p, watched); got != c.want {
			t.Errorf("Within(%s, watched) = %v, want %v (resolved %s)", c.p, got, c.want, Resolve(c.p))
		}
	}
}
