//go:build !unix

package monitor

import (
	"errors"
	"io"
	"os"
)

// canList lists one name of the folder.
func canList(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	if _, err := f.Readdirnames(1); err != nil && !errors.Is(err, io.EOF) {
		return err
	}
	return nil
}
