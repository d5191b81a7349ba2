package ingest

import (
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// Found is one capture found on disk: the path to Open (the metadata file
// of a SigMF pair, or a raw file), or a problem that keeps it from being a
// capture (a SigMF data file without its metadata, a symlink leaving the
// root, ...).
type Found struct {
	Path    string
	Problem error // nil when Path can be opened
}

// Find walks each path (a file or a folder, recursively) and returns the
// captures in it, sorted by path. A SigMF pair is reported once, by its
// metadata file; a data file whose metadata is missing is reported with a
// problem. Symbolic links are not followed out of the folder given.
// Truth sidecars and other files are ignored. Raw files are those
// IsCaptureFile names; FindRaw takes raw settings into account.
func Find(paths ...string) ([]Found, error) { return FindRaw(RawSettings{}, paths...) }

// FindRaw is Find with the raw-file settings of the input: in folders, the
// files raw.IsCapture takes (raw.Pattern adds names); a file named on its
// own is a raw capture whatever its name when raw.Format is given (a
// sidecar never is).
func FindRaw(raw RawSettings, paths ...string) ([]Found, error) { return findRaw(raw, nil, paths...) }

// findRaw is FindRaw; ignored, when not nil, is told of each file of a
// walked folder that is left out although it has a raw-data ending
// (HasRawDataEnding).
func findRaw(raw RawSettings, ignored func(path string), paths ...string) ([]Found, error) {
	var out []Found
	seen := map[string]bool{}
	addFile := func(p string) {
		ext := strings.ToLower(filepath.Ext(p))
		switch {
		case ext == MetaExt:
		case ext == DataExt:
			meta := strings.TrimSuffix(p, filepath.Ext(p)) + MetaExt
			if _, err := os.Lstat(meta); err == nil {
				return // reported by its metadata file
			}
			if !seen[p] {
				seen[p] = true
				out = append(out, Found{Path: p, Problem: captureErr(p, "SigMF data file without its metadata %s", filepath.Base(meta))})
			}
			return
		case raw.IsCapture(p):
		default:
			if ignored != nil && HasRawDataEnding(p) {
				ignored(p)
			}
			return
		}
		if !seen[p] {
			seen[p] = true
			out = append(out, Found{Path: p})
		}
	}
	for _, root := range paths {
		st, err := os.Stat(root)
		if err != nil {
			return nil, err
		}
		if !st.IsDir() {
			switch {
			case IsSidecar(root):
				out = append(out, Found{Path: root, Problem: captureErr(root, "not a capture: a %s file travels beside captures and holds no samples", filepath.Ext(root))})
				continue
			case !raw.IsCapture(root) && raw.Format == FormatUnknown:
				out = append(out, Found{Path: root, Problem: captureErr(root, "not a capture: the ending %q is neither SigMF nor a sample format; give --format (and --rate) to read it as raw samples", filepath.Ext(root))})
				continue
			}
			if strings.ToLower(filepath.Ext(root)) == DataExt {
				root = strings.TrimSuffix(root, filepath.Ext(root)) + MetaExt
			}
			if !seen[root] {
				seen[root] = true
				out = append(out, Found{Path: root})
			}
			continue
		}
		err = filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				out = append(out, Found{Path: p, Problem: captureErr(p, "cannot read: %v", unwrapPathError(err))})
				if d != nil && d.IsDir() {
					return fs.SkipDir
				}
				return nil
			}
			if d.IsDir() {
				if p != root && strings.HasPrefix(d.Name(), ".") {
					return fs.SkipDir
				}
				return nil
			}
			if d.Type()&fs.ModeSymlink != 0 {
				if !raw.IsCapture(p) {
					return nil
				}
				if problem := checkLink(root, p); problem != nil {
					out = append(out, Found{Path: p, Problem: problem})
					return nil
				}
			} else if !d.Type().IsRegular() {
				if raw.IsCapture(p) {
					out = append(out, Found{Path: p, Problem: captureErr(p, "not a regular file (%s)", d.Type())})
				}
				return nil
			}
			if strings.HasPrefix(d.Name(), ".") {
				return nil // temporary files of writers
			}
			addFile(p)
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Path < out[j].Path })
	return out, nil
}

// checkLink refuses a symbolic link whose target leaves root or cannot be
// resolved.
func checkLink(root, p string) error {
	target, err := filepath.EvalSymlinks(p)
	if err != nil {
		return captureErr(p, "symbolic link cannot be resolved: %v", unwrapPathError(err))
	}
	absRoot, err := filepath.EvalSymlinks(root)
	if err != nil {
		return captureErr(p, "cannot resolve the watched root: %v", err)
	}
	rel, err := filepath.Rel(absRoot, target)
	if err != nil || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) {
		return captureErr(p, "symbolic link points outside %s (to %s); refused", root, target)
	}
	return nil
}
