package eventlog

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"

	"quietband/ingest"
)

// Reattach checks that the file at the log's path is still the active file
// the Log writes, whole, and deals with what was done to it outside the
// daemon (issue 17, item 5). The log is the record of truth, so nothing of
// it is dropped silently:
//
//   - moved away (mv, as logrotate does, with or without a new empty file
//     in its place) or deleted: the Log's open descriptor still reads every
//     byte it wrote, and those are copied, synced, to the rotated segment
//     the Log's own rotation would have made (SegmentName at the file's
//     first seq); the seqs and the chain go on in a new active file, and
//     the whole log verifies. A non-empty file found in the path is set
//     aside as <path>.foreign-<seq>, untouched;
//   - cut (truncated in place, what is left whole records of it): what
//     was cut is gone. The remains are set
//     aside as <path>.cut-<first seq>, untouched, and the chain goes on in
//     a new active file from the last record written, so Verify names the
//     place where records are missing.
//
// It returns what it found and did ("" when the file is as the Log left
// it), for the caller to log and count. An error means the Log could not
// go on (it is then in the failed state). Reopen calls it first.
func (l *Log) Reattach() (string, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.closed {
		return "", ErrClosed
	}
	if l.f == nil {
		return "", nil // failed: Reopen recovers from the files
	}
	what, err := l.reattach()
	if err != nil {
		return what, l.fail("reattaching", err)
	}
	return what, nil
}

func (l *Log) reattach() (string, error) {
	fi, err := l.f.Stat()
	if err != nil {
		return "", err
	}
	pi, perr := os.Lstat(l.path)
	if perr != nil && !errors.Is(perr, fs.ErrNotExist) {
		return "", perr
	}
	same := perr == nil && os.SameFile(fi, pi)
	if same && pi.Size() >= l.size {
		return "", nil
	}
	var what string
	if same {
		// Shorter: a cut, if what is left reads as whole records of this
		// log (a prefix); an edit that broke a line is corruption, for
		// Open and Verify to name, not a cut.
		r, err := os.Open(l.path)
		if err != nil {
			return "", err
		}
		st, err := scanFile(r, l.path)
		r.Close()
		if err != nil || st.torn != nil || (st.lines > 0 && (st.first != l.firstSeq || st.last >= l.seq)) {
			return "", nil
		}
		aside := fmt.Sprintf("%s.cut-%d", l.path, l.firstSeq)
		what = fmt.Sprintf("active file %s was cut outside the daemon from %d to %d bytes: records %d–%d are lost (its remains set aside as %s); the chain goes on at seq %d, and verify names the gap",
			l.path, l.size, pi.Size(), l.firstSeq, l.seq, aside, l.seq+1)
		l.f.Close()
		l.f, l.w = nil, nil
		if err := os.Rename(l.path, aside); err != nil {
			return what, err
		}
	} else {
		how := "deleted"
		if perr == nil {
			how = "replaced by another file"
		}
		what = fmt.Sprintf("active file %s was moved away or %s outside the daemon", l.path, how)
		if l.lines > 0 {
			seg := SegmentName(l.path, l.firstSeq)
			if err := copySegment(l.f, l.size, seg); err != nil {
				return what, fmt.Errorf("keeping records %d–%d as %s: %w", l.firstSeq, l.seq, seg, err)
			}
			what += fmt.Sprintf(": its records %d–%d kept as segment %s (copied from the open file)", l.firstSeq, l.seq, seg)
		}
		l.f.Close()
		l.f, l.w = nil, nil
		if perr == nil && pi.Size() > 0 {
			aside := fmt.Sprintf("%s.foreign-%d", l.path, l.seq+1)
			if err := os.Rename(l.path, aside); err != nil {
				return what, err
			}
			what += "; the file found in its place set aside as " + aside
		}
		what += fmt.Sprintf("; the chain goes on at seq %d in a new active file", l.seq+1)
	}
	f, err := os.OpenFile(l.path, os.O_RDWR|os.O_APPEND|os.O_CREATE, 0o640)
	if err != nil {
		return what, err
	}
	if err := ingest.SyncDir(filepath.Dir(l.path)); err != nil {
		f.Close()
		return what, err
	}
	l.setFile(f)
	l.size, l.lines, l.firstSeq = 0, 0, 0
	l.outside.Add(1)
	l.logger.Error("eventlog: "+what, "file", l.path, "last_seq", l.seq)
	return what, nil
}

// OutsideChanges returns how many times Reattach (or Reopen) found the
// active file moved away, deleted, replaced or cut outside the Log and
// took it up.
func (l *Log) OutsideChanges() uint64 { return l.outside.Load() }

// copySegment writes the first size bytes of src to a new file seg (not
// replacing one), synced with its folder.
func copySegment(src io.ReaderAt, size int64, seg string) error {
	tmp := seg + ".part"
	out, err := os.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o640)
	if err != nil {
		return err
	}
	n, err := io.Copy(out, io.NewSectionReader(src, 0, size))
	if err == nil && n != size {
		err = fmt.Errorf("read %d of %d bytes", n, size)
	}
	if err == nil {
		err = out.Sync()
	}
	if cerr := out.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		if _, serr := os.Lstat(seg); serr == nil {
			err = fmt.Errorf("segment %s already exists", seg)
		} else {
			err = os.Rename(tmp, seg)
		}
	}
	if err != nil {
		os.Remove(tmp)
		return err
	}
	return ingest.SyncDir(filepath.Dir(seg))
}
