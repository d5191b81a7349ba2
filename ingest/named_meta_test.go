package ingest

import (
	"os"
	"path/filepath"
	"testing"
)

// TestFindNamedMeta: a SigMF capture named on the command line by its
// metadata file is found as that capture, the same as when named by its
// data file (the event log and replay's table name captures by their
// .sigmf-meta); a truth file named on its own is still refused as a
// sidecar.
func TestFindNamedMeta(t *testing.T) {
	dir := t.TempDir()
	meta := filepath.Join(dir, "c.sigmf-meta")
	data := filepath.Join(dir, "c.sigmf-data")
	truth := filepath.Join(dir, "c.truth.json")
	for _, p := range []string{meta, data, truth} {
		if err := os.WriteFile(p, []byte("{}"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	for _, named := range []string{meta, data} {
		got, err := Find(named)
		if err != nil {
			t.Fatal(err)
		}
		if len(got) != 1 || got[0].Problem != nil || got[0].Path != meta || got[0].DataPath != data {
			t.Errorf("Find(%s) = %+v, want the capture %s with data %s", filepath.Base(named), got, meta, data)
		}
	}
	got, err := Find(truth)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 1 || got[0].Problem == nil {
		t.Errorf("Find(truth) = %+v, want a refusal", got)
	}
}
