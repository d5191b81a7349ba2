package report

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"quietband/detect"
	"quietband/ingest"
)

// OutputOptions say which of the analyst's outputs a replay writes
// besides the event log.
type OutputOptions struct {
	Dir    string // the report folder: index.html and pictures ("": no report)
	All    bool   // draw every capture, not only those with events
	Source string // what the report is of (its page says so)
	// Annotate writes each capture's events as SigMF annotations: into a
	// copy of its metadata under Dir/annotations, or, with InPlace, into
	// the capture's own metadata (atomically).
	Annotate, InPlace bool
	CSV               string // the events' CSV file ("": none)
	// Messages takes the notes for the analyst (a raw capture cannot be
	// annotated, where the report is), each line starting with Prefix.
	Messages io.Writer
	Prefix   string
}

// Outputs are the analyst's outputs of one replay: the HTML report with
// its pictures, the events' CSV, SigMF annotations. A replay gives each
// capture an Observer before its analysis and its records after (Done),
// in order, then closes them.
type Outputs struct {
	o       OutputOptions
	rep     *Report
	csv     *CSVWriter
	csvFile *os.File
	annDir  string
	obs     *Observer
}

// NewOutputs prepares the outputs o asks for; nil (and no error) when it
// asks for none.
func NewOutputs(o OutputOptions) (*Outputs, error) {
	if o.Dir == "" && o.CSV == "" && !o.Annotate {
		return nil, nil
	}
	if o.Messages == nil {
		o.Messages = io.Discard
	}
	a := &Outputs{o: o}
	if o.Dir != "" {
		rep, err := New(o.Dir, Options{All: o.All, Source: o.Source})
		if err != nil {
			return nil, err
		}
		a.rep = rep
		a.annDir = filepath.Join(o.Dir, "annotations")
	}
	if o.CSV != "" {
		f, err := os.Create(o.CSV)
		if err != nil {
			return nil, err
		}
		a.csvFile, a.csv = f, NewCSVWriter(f)
	}
	return a, nil
}

// Observer returns a fresh observer for the capture about to be analysed
// (nil when no pictures are drawn).
func (a *Outputs) Observer(ingest.Found) detect.BlockObserver {
	if a == nil || a.rep == nil {
		return nil
	}
	a.obs = NewObserver()
	return a.obs
}

// Done takes the outcome of one capture: its capture record and events.
func (a *Outputs) Done(f ingest.Found, rec detect.CaptureRecord, events []detect.Event) error {
	if a == nil {
		return nil
	}
	analysed := rec.Status == detect.StatusOK
	var sum *Summary
	if a.obs != nil && analysed {
		sum = a.obs.Summary()
	}
	a.obs = nil
	if a.rep != nil {
		if err := a.rep.Add(Capture{Record: rec, Events: events, Summary: sum}); err != nil {
			return err
		}
	}
	if a.csv != nil {
		if err := a.csv.Write(events); err != nil {
			return fmt.Errorf("%s: %w", a.o.CSV, err)
		}
	}
	if a.o.Annotate && analysed {
		if err := a.annotate(f, events); err != nil {
			return err
		}
	}
	return nil
}

// annotate writes the capture's events as SigMF annotations: in place, or
// into a copy under the report's annotations folder.
func (a *Outputs) annotate(f ingest.Found, events []detect.Event) error {
	c := f.Capture
	if c.MetaPath == "" {
		if len(events) > 0 {
			fmt.Fprintf(a.o.Messages, "%s%s is a raw capture: no SigMF metadata, %d event(s) not annotated\n", a.o.Prefix, f.Name, len(events))
		}
		return nil
	}
	if a.o.InPlace {
		_, err := AnnotateFile(c, c.MetaPath, events)
		return err
	}
	if len(events) == 0 {
		return nil
	}
	rel := filepath.FromSlash(f.Name)
	if filepath.IsAbs(rel) || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) {
		rel = filepath.Base(rel)
	}
	rel = strings.TrimSuffix(strings.TrimSuffix(rel, ingest.MetaExt), ingest.DataExt) + ingest.MetaExt
	dst := filepath.Join(a.annDir, rel)
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return err
	}
	_, err := AnnotateFile(c, dst, events)
	return err
}

// Close finishes the outputs and says where the report is.
func (a *Outputs) Close() error {
	if a == nil {
		return nil
	}
	var errs []error
	if a.csv != nil {
		if err := a.csv.Flush(); err != nil {
			errs = append(errs, fmt.Errorf("%s: %w", a.o.CSV, err))
		}
		if err := a.csvFile.Sync(); err != nil {
			errs = append(errs, err)
		}
		if err := a.csvFile.Close(); err != nil {
			errs = append(errs, err)
		}
	}
	if a.rep != nil {
		if err := a.rep.Close(); err != nil {
			errs = append(errs, err)
		} else {
			fmt.Fprintf(a.o.Messages, "%sreport written to %s\n", a.o.Prefix, filepath.Join(a.rep.Dir(), "index.html"))
		}
	}
	return errors.Join(errs...)
}
