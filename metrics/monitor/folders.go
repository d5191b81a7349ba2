package monitor

import (
	"errors"
	"fmt"
	"os"
)

// FolderProblem says what is wrong with a watched folder: it does not
// exist, is not a folder, or this process may not list it (read and
// search permission, access(2) on Unix: no file descriptor is taken, so
// /readyz and scrapes cost none); nil when it can be watched. A mistyped
// --watch is an error at start and a folder that goes away makes the
// daemon not ready while it lasts (issue 18 item 4).
func FolderProblem(path string) error {
	st, err := os.Stat(path)
	switch {
	case errors.Is(err, os.ErrNotExist):
		return fmt.Errorf("watched folder %s does not exist (create it, or check the path)", path)
	case err != nil:
		return fmt.Errorf("watched folder %s: %w", path, err)
	case !st.IsDir():
		return fmt.Errorf("watched folder %s is not a folder", path)
	}
	if err := canList(path); err != nil {
		return fmt.Errorf("watched folder %s cannot be read: %w", path, err)
	}
	return nil
}
