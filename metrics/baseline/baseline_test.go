package baseline

import (
	"bytes"
	"context"
	"errors"
	"io/fs"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"quietband/detect"
	"quietband/ingest"
)

// learned returns baselines learned by the pipeline from one clean raw
// ci8 capture at 1 MS/s (complex white Gaussian noise, σ = 0.1 per part).
func learned(t *testing.T) *detect.Baselines {
	t.Helper()
	rng := rand.New(rand.NewPCG(3, 4))
	b := make([]byte, 2*20000)
	for i := range b {
		b[i] = byte(int8(math.Round(max(-127, min(127, 12.8*rng.NormFloat64())))))
	}
	path := filepath.Join(t.TempDir(), "clean.ci8")
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := ingest.Open(path, ingest.RawSettings{SampleRate: 1e6})
	if err != nil {
		t.Fatal(err)
	}
	st := detect.NewState()
	if _, err := detect.NewPipeline(detect.Config{}, st).Process(context.Background(), c, "clean.ci8"); err != nil {
		t.Fatal(err)
	}
	if st.Baselines.Len() != 1 {
		t.Fatalf("%d baselines learned, want 1", st.Baselines.Len())
	}
	return st.Baselines
}

// TestSaveLoad: what Save writes, Load reads back to the same baselines
// (saved again, the same bytes); a missing file is fs.ErrNotExist, a file
// that is no baseline an *UnusableError naming it, and SetAside moves it
// out of the way under a name that says why.
func TestSaveLoad(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, FileName)
	if err := Save(path, learned(t)); err != nil {
		t.Fatal(err)
	}
	b, err := Load(path)
	if err != nil || b.Len() != 1 {
		t.Fatalf("Load: %v, %d baselines", err, b.Len())
	}
	again := filepath.Join(dir, "again.json")
	if err := Save(again, b); err != nil {
		t.Fatal(err)
	}
	if x, y := mustRead(t, path), mustRead(t, again); !bytes.Equal(x, y) {
		t.Errorf("saved, loaded and saved again: %d bytes, first %d", len(y), len(x))
	}

	if _, err := Load(filepath.Join(dir, "none.json")); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("missing file: %v, want fs.ErrNotExist", err)
	}
	bad := filepath.Join(dir, "bad.json")
	os.WriteFile(bad, []byte("{not json"), 0o644)
	_, err = Load(bad)
	var ue *UnusableError
	if !errors.As(err, &ue) || ue.Path != bad || !strings.HasPrefix(err.Error(), bad+": ") {
		t.Fatalf("unusable file: %v, want an *UnusableError naming it", err)
	}
	at := time.Date(2026, 5, 1, 6, 7, 8, 0, time.UTC)
	aside, err := SetAside(bad, at)
	if err != nil || aside != bad+".bad-20260501T060708Z" {
		t.Fatalf("SetAside = %q, %v", aside, err)
	}
	if _, err := os.Stat(bad); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("the unusable file is still there: %v", err)
	}
	if _, err := os.Stat(aside); err != nil {
		t.Error(err)
	}
}

func mustRead(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}
