package monitor

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
	"time"

	"quietband/ingest"
	"quietband/metrics/ledger"
	"quietband/metrics/replay"
)

// moveAway moves a capture's files (metadata first, so that the watcher
// never sees a lone metadata file) to dir, keeping their path below the
// watched folder.
func (m *Monitor) moveAway(w ingest.Found, dir, why string) {
	in := m.inputs[w.Input]
	files := w.Files()
	slices.SortStableFunc(files, func(a, b string) int {
		ma, mb := strings.HasSuffix(a, ingest.MetaExt), strings.HasSuffix(b, ingest.MetaExt)
		switch {
		case ma && !mb:
			return -1
		case mb && !ma:
			return 1
		}
		return 0
	})
	root, _ := filepath.Abs(in.Path)
	for _, f := range files {
		rel, err := filepath.Rel(root, f)
		if err != nil || strings.HasPrefix(rel, "..") {
			rel = filepath.Base(f)
		}
		dst := filepath.Join(dir, rel)
		if err := moveFile(f, dst); err != nil {
			m.log.Error("quietband run: cannot move capture file", "why", why, "file", f, "to", dst, "err", err)
			return
		}
		m.log.Info("quietband run: capture file moved", "why", why, "file", f, "to", dst)
	}
}

// moveFile moves src to dst (not replacing an existing file: a suffix is
// added), copying across file systems, and syncs the folders involved.
func moveFile(src, dst string) error {
	if err := os.MkdirAll(filepath.Dir(dst), 0o750); err != nil {
		return err
	}
	for n := 1; ; n++ {
		if _, err := os.Lstat(dst); errors.Is(err, os.ErrNotExist) {
			break
		}
		ext := filepath.Ext(dst)
		dst = strings.TrimSuffix(dst, ext) + fmt.Sprintf(".%d", n) + ext
		if n > 1 {
			dst = strings.Replace(dst, fmt.Sprintf(".%d.%d", n-1, n), fmt.Sprintf(".%d", n), 1)
		}
	}
	err := os.Rename(src, dst)
	if errors.Is(err, syscall.EXDEV) {
		err = copyFile(src, dst)
		if err == nil {
			err = os.Remove(src)
		}
	}
	if err != nil {
		return err
	}
	if err := ingest.SyncDir(filepath.Dir(dst)); err != nil {
		return err
	}
	return ingest.SyncDir(filepath.Dir(src))
}

// copyFile copies a regular file or recreates a symbolic link, durably.
func copyFile(src, dst string) error {
	st, err := os.Lstat(src)
	if err != nil {
		return err
	}
	if st.Mode()&os.ModeSymlink != 0 {
		target, err := os.Readlink(src)
		if err != nil {
			return err
		}
		return os.Symlink(target, dst)
	}
	in, err := os.Open(src)
	if err != nil {
		return err
	}
	defer in.Close()
	tmp, err := os.CreateTemp(filepath.Dir(dst), "."+filepath.Base(dst)+".tmp*")
	if err != nil {
		return err
	}
	_, err = io.Copy(tmp, in)
	if err == nil {
		err = tmp.Sync()
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp.Name(), st.Mode().Perm())
	}
	if err == nil {
		err = os.Rename(tmp.Name(), dst)
	}
	if err != nil {
		os.Remove(tmp.Name())
	}
	return err
}

// sweep applies retention: captures analysed (recorded ok with their
// present content) whose files are all older than retention.days are
// deleted or moved. The record is durable by then: it is in the ledger,
// which holds only records read back from or fsynced to the log.
func (m *Monitor) sweep(now time.Time) {
	cutoff := now.Add(-time.Duration(m.cfg.Retention.Days) * 24 * time.Hour)
	n := 0
	for _, in := range m.cfg.Inputs {
		found, err := ingest.FindRaw(in.Raw, in.Path)
		if err != nil {
			m.log.Error("quietband run: retention: cannot scan", "input", in.Name, "err", err)
			continue
		}
		root, _ := filepath.Abs(in.Path)
		for _, f := range found {
			if f.Problem != nil {
				continue
			}
			path, _ := filepath.Abs(f.Path)
			rel, err := filepath.Rel(root, path)
			if err != nil {
				continue
			}
			name := filepath.ToSlash(rel)
			ent, ok, err := m.ledger.Lookup(in.Name, name)
			if err != nil {
				m.log.Error("quietband run: retention: ledger", "capture", name, "err", err)
				return
			}
			if !ok {
				continue
			}
			w := f
			w.Input, w.Path, w.Name = in.Name, path, name
			w.DataPath, _ = filepath.Abs(f.DataPath)
			old := true
			for _, p := range w.Files() {
				if st, err := os.Lstat(p); err != nil || st.ModTime().After(cutoff) {
					old = false
				}
			}
			if !old {
				continue
			}
			// Links are left alone (as the files they point to are not
			// the daemon's to retire); the SHA-256 of an unchanged file
			// comes from the ledger.
			id, idOK := ledger.Identify(w.DataPath, false)
			if !idOK {
				continue
			}
			// Its present content: the data's SHA-256 and how its metadata,
			// read now, reads them (a capture whose metadata was corrected
			// and not yet analysed again is not retired).
			if w.Path != w.DataPath {
				w.Open(in.Raw)
			}
			meta := replay.MetadataSHA256(w)
			sha, known := ent.SHAFor(id, idOK)
			if !known {
				var stable bool
				sha, stable = m.hashData(w.DataPath, false, id, idOK)
				if _, recorded := ent.Outcome(sha, meta); recorded && stable {
					m.ledger.Remember(in.Name, name, id, sha)
				}
			}
			if reason, ok := ent.Outcome(sha, meta); !ok || reason != "" {
				continue
			}
			n++
			if m.cfg.Retention.Action == "move" {
				m.moveAway(w, filepath.Join(m.cfg.Retention.Dir, in.Name), "retention")
				continue
			}
			files := w.Files()
			slices.SortStableFunc(files, func(a, b string) int {
				return boolCmp(strings.HasSuffix(b, ingest.MetaExt), strings.HasSuffix(a, ingest.MetaExt))
			})
			for _, p := range files {
				if err := os.Remove(p); err != nil {
					m.log.Error("quietband run: retention: cannot delete", "file", p, "err", err)
				}
			}
			m.log.Info("quietband run: retention: capture deleted", "capture", name, "input", in.Name)
		}
	}
	if n > 0 {
		m.log.Info("quietband run: retention sweep", "captures", n, "action", m.cfg.Retention.Action, "older_than_days", m.cfg.Retention.Days)
	}
}

func boolCmp(a, b bool) int {
	switch {
	case a == b:
		return 0
	case a:
		return 1
	}
	return -1
}
