package ingest

import (
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"time"
)

// Found is one capture found on disk, by Find or by a Watcher (the one
// type for a capture found, from the folder walk to the analysis): the
// path to Open (the metadata file of a SigMF pair, or a raw file), its
// name and, once opened, the Capture; or a problem that keeps it from
// being a capture (a SigMF data file without its metadata, a symlink
// leaving the root, a file that does not open, ...).
type Found struct {
	Input    string // the Watcher's input it was found in; "" from Find
	Root     string // the folder it was found under (Find: the path given, or a named file's folder)
	Path     string // the file to Open: SigMF metadata, or the raw file
	DataPath string // the file holding the samples (may not exist)
	Name     string // Path relative to Root, '/'-separated: the capture's name in the records
	// Capture is the opened capture (Open; a Watcher hands captures out
	// opened); nil when Problem is set or it was not opened yet.
	Capture *Capture
	// Problem says why it cannot be analysed (a *CaptureError); nil when
	// Path can be opened.
	Problem error
	// Ready is when a Watcher found the capture complete.
	Ready time.Time
}

// Open opens the capture (Capture, or Problem when it does not open),
// unless it has a problem already or is open.
func (f *Found) Open(raw RawSettings) {
	if f.Problem == nil && f.Capture == nil {
		f.Capture, f.Problem = Open(f.Path, raw)
	}
}

// Files lists the capture's files that exist: the metadata and data files
// of a SigMF pair, or the raw file.
func (f Found) Files() []string {
	var out []string
	for _, p := range []string{f.Path, f.DataPath} {
		if p == "" || slices.Contains(out, p) {
			continue
		}
		if _, err := os.Lstat(p); err == nil {
			out = append(out, p)
		}
	}
	return out
}

// dataPathOf is the data file of the capture whose file to open is path:
// the .sigmf-data beside a .sigmf-meta, else path itself.
func dataPathOf(path string) string {
	if strings.EqualFold(filepath.Ext(path), MetaExt) {
		return strings.TrimSuffix(path, filepath.Ext(path)) + DataExt
	}
	return path
}

// Find walks each path (a file or a folder, recursively) and returns the
// captures in it, sorted by path, not opened. A SigMF pair is reported
// once, by its metadata file; a data file whose metadata is missing is
// reported with a problem. Symbolic links are not followed out of the
// folder given. Truth sidecars and other files are ignored. Raw files are
// those IsCaptureFile names; FindRaw takes raw settings into account.
// Each capture's Root is the folder given (or a named file's folder) and
// its Name the path relative to it.
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
	root := ""
	found := func(f Found) Found {
		f.Root = root
		if f.DataPath == "" {
			f.DataPath = dataPathOf(f.Path)
		}
		name, err := filepath.Rel(root, f.Path)
		if err != nil {
			name = f.Path
		}
		f.Name = filepath.ToSlash(name)
		return f
	}
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
				out = append(out, found(Found{Path: p, DataPath: p, Problem: captureErr(p, "SigMF data file without its metadata %s", filepath.Base(meta))}))
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
			out = append(out, found(Found{Path: p}))
		}
	}
	for _, path := range paths {
		st, err := os.Stat(path)
		if err != nil {
			return nil, err
		}
		root = path
		if !st.IsDir() {
			root = filepath.Dir(path)
			switch {
			case strings.EqualFold(filepath.Ext(path), MetaExt):
				// A SigMF capture named by its metadata file (as the
				// event log and the tables name captures).
			case IsSidecar(path):
				out = append(out, found(Found{Path: path, DataPath: path, Problem: captureErr(path, "not a capture: a %s file travels beside captures and holds no samples", filepath.Ext(path))}))
				continue
			case !raw.IsCapture(path) && raw.Format == FormatUnknown:
				out = append(out, found(Found{Path: path, DataPath: path, Problem: captureErr(path, "not a capture: the ending %q is neither SigMF nor a sample format; give --format (and --rate) to read it as raw samples", filepath.Ext(path))}))
				continue
			}
			if strings.ToLower(filepath.Ext(path)) == DataExt {
				path = strings.TrimSuffix(path, filepath.Ext(path)) + MetaExt
			}
			if !seen[path] {
				seen[path] = true
				out = append(out, found(Found{Path: path}))
			}
			continue
		}
		err = filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				out = append(out, found(Found{Path: p, DataPath: p, Problem: captureErr(p, "cannot read: %w", unwrapPathError(err))}))
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
					out = append(out, found(Found{Path: p, DataPath: p, Problem: problem}))
					return nil
				}
			} else if !d.Type().IsRegular() {
				if raw.IsCapture(p) {
					out = append(out, found(Found{Path: p, DataPath: p, Problem: captureErr(p, "not a regular file (%s)", d.Type())}))
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
