package ingest

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestFindRaw checks which files a folder walk and a named file give under
// raw settings (DESIGN.md "Inputs": raw files take any name once their
// format is given; sidecars are never sample data): a walk takes SigMF
// pairs, format endings, the common raw endings and pattern matches, never
// .sigmf-meta twice, truth or other sidecars, nor .bin without a pattern;
// a file named on its own is a
// capture whatever its name when a format is given, and otherwise comes
// back with a problem naming --format. Files with raw-data endings that a
// walk leaves out are reported to the caller (the Watcher warns).
func TestFindRaw(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"a.sigmf-meta", "a.sigmf-data", "a.truth.json", "b.cs16", "c.bin", "cap_7",
		"notes.txt", "README.md", "LICENSE.txt", "d.yaml", "e.sigmf-collection", "weird.name"} {
		if err := os.WriteFile(filepath.Join(dir, name), make([]byte, 8), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	list := func(raw RawSettings, paths ...string) (ok []string, bad map[string]string) {
		t.Helper()
		found, err := FindRaw(raw, paths...)
		if err != nil {
			t.Fatal(err)
		}
		bad = map[string]string{}
		for _, f := range found {
			if f.Problem != nil {
				bad[filepath.Base(f.Path)] = f.Problem.Error()
			} else {
				ok = append(ok, filepath.Base(f.Path))
			}
		}
		return ok, bad
	}
	ok, bad := list(RawSettings{}, dir)
	if want := []string{"a.sigmf-meta", "b.cs16"}; !slices.Equal(ok, want) || len(bad) != 0 {
		t.Errorf("no settings: %v %v, want %v", ok, bad, want)
	}
	// A format alone takes no more files in a walk: a pattern does.
	ok, _ = list(RawSettings{Format: CI8}, dir)
	if want := []string{"a.sigmf-meta", "b.cs16"}; !slices.Equal(ok, want) {
		t.Errorf("format only: %v, want %v", ok, want)
	}
	ok, _ = list(RawSettings{Format: CI8, Pattern: "cap_*"}, dir)
	if want := []string{"a.sigmf-meta", "b.cs16", "cap_7"}; !slices.Equal(ok, want) {
		t.Errorf("pattern cap_*: %v, want %v", ok, want)
	}
	var ignored []string
	if _, err := findRaw(RawSettings{}, func(p string) { ignored = append(ignored, filepath.Base(p)) }, dir); err != nil || !slices.Equal(ignored, []string{"c.bin"}) {
		t.Errorf("left out with a raw-data ending: %v, want [c.bin]", ignored)
	}
	// A pattern matching everything still leaves the sidecars out.
	ok, _ = list(RawSettings{Format: CI8, Pattern: "*"}, dir)
	if want := []string{"a.sigmf-meta", "b.cs16", "c.bin", "cap_7", "weird.name"}; !slices.Equal(ok, want) {
		t.Errorf("pattern *: %v, want %v", ok, want)
	}
	// Named files.
	ok, bad = list(RawSettings{Format: CI8}, filepath.Join(dir, "weird.name"), filepath.Join(dir, "a.truth.json"))
	if !slices.Equal(ok, []string{"weird.name"}) || !strings.Contains(bad["a.truth.json"], "holds no samples") {
		t.Errorf("named with --format: %v %v", ok, bad)
	}
	for _, name := range []string{"weird.name", "c.bin"} {
		_, bad = list(RawSettings{}, filepath.Join(dir, name))
		if p := bad[name]; !strings.Contains(p, "--format") || !strings.Contains(p, name) {
			t.Errorf("%s named without a format: %q", name, p)
		}
	}
}
