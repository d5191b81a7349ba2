package monitor

import (
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
)

// Resolve returns the absolute path p names once symbolic links are
// followed: those of its longest existing ancestor (filepath.EvalSymlinks),
// with the part that does not exist yet appended (issue 17, item 12: a
// retention folder given as a link into a watched folder passed a check
// that compared the paths as written).
func Resolve(p string) string {
	a, err := filepath.Abs(p)
	if err != nil {
		return filepath.Clean(p)
	}
	rest := ""
	for cur := a; ; {
		r, err := filepath.EvalSymlinks(cur)
		if err == nil {
			return filepath.Join(r, rest)
		}
		if !errors.Is(err, fs.ErrNotExist) {
			return a
		}
		parent := filepath.Dir(cur)
		if parent == cur {
			return a
		}
		rest = filepath.Join(filepath.Base(cur), rest)
		cur = parent
	}
}

// Within reports whether path p lies in folder dir (or is it), both
// resolved (Resolve).
func Within(p, dir string) bool {
	rel, err := filepath.Rel(Resolve(dir), Resolve(p))
	return err == nil && rel != ".." && !strings.HasPrefix(rel, ".."+string(os.PathSeparator))
}
