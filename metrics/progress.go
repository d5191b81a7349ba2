package metrics

import (
	"sync"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"quietband/detect"
	"quietband/ingest"
)

// progress is the collector of the capture being analysed, per input
// (issue 17, item 16: a 10 GB capture took 40 s with nothing in the
// metrics about it; queue_depth counts only the captures waiting):
//
//	quietband_analysis_in_progress{input}               1 while one is analysed
//	quietband_analysis_capture_samples{input}           its complex samples
//	quietband_analysis_samples_done{input}              those read and analysed so far
//	quietband_analysis_progress_ratio{input}            done / capture samples, 0 … 1
//	quietband_analysis_started_timestamp_seconds{input} when its analysis began (Unix s)
//
// The capture's name is not a label (one new series per capture); the
// daemon logs it when it starts a large one. The values of an input with
// nothing in progress are 0. The satellites of a capture are measured from
// the same read, so samples_done reaching the capture's samples means
// that only their tracking's end and the log's commit remain.
type progress struct {
	inProgress, size, done, ratio, started *prometheus.Desc

	mu     sync.Mutex
	inputs map[string]*Analysis
	order  []string
}

func newProgress(inputs []string) *progress {
	d := func(name, help string) *prometheus.Desc {
		return prometheus.NewDesc(prometheus.BuildFQName(Namespace, "analysis", name), help, []string{"input"}, nil)
	}
	p := &progress{
		inProgress: d("in_progress", "1 while a capture of the input is being analysed, else 0."),
		size:       d("capture_samples", "Complex samples of the capture being analysed; 0 while none is."),
		done:       d("samples_done", "Samples of the capture being analysed read and analysed so far; 0 while none is."),
		ratio:      d("progress_ratio", "Fraction of the capture being analysed read and analysed so far (samples_done / capture_samples), 0 to 1; 0 while none is."),
		started:    d("started_timestamp_seconds", "When the analysis of the capture in progress began, Unix seconds; 0 while none is."),
		inputs:     map[string]*Analysis{},
	}
	for _, in := range inputs {
		p.entry(in)
	}
	return p
}

// entry returns the input's Analysis, making it for an input not
// configured at the start (replay-style callers).
func (p *progress) entry(input string) *Analysis {
	p.mu.Lock()
	defer p.mu.Unlock()
	a, ok := p.inputs[input]
	if !ok {
		a = &Analysis{}
		p.inputs[input] = a
		p.order = append(p.order, input)
	}
	return a
}

func (p *progress) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{p.inProgress, p.size, p.done, p.ratio, p.started} {
		ch <- d
	}
}

func (p *progress) Collect(ch chan<- prometheus.Metric) {
	p.mu.Lock()
	order := append([]string(nil), p.order...)
	p.mu.Unlock()
	for _, in := range order {
		a := p.entry(in)
		size, done, start := a.size.Load(), a.done.Load(), a.start.Load()
		ratio, on := 0.0, 0.0
		if start != 0 {
			on = 1
			if size > 0 {
				ratio = min(1, float64(done)/float64(size))
			}
		}
		g := func(d *prometheus.Desc, v float64) {
			ch <- prometheus.MustNewConstMetric(d, prometheus.GaugeValue, v, in)
		}
		g(p.inProgress, on)
		g(p.size, float64(size))
		g(p.done, float64(done))
		g(p.ratio, ratio)
		g(p.started, float64(start)/1e9)
	}
}

// Analysis is one input's capture in progress: a detect.BlockObserver
// that counts the samples of the blocks the pipeline has analysed. Begin
// (called by the pipeline) takes the capture's size; Done ends it.
type Analysis struct {
	size, done atomic.Int64
	start      atomic.Int64 // Unix ns; 0 while none is in progress
}

// Begin is detect.BlockObserver's: the capture's size.
func (a *Analysis) Begin(c *ingest.Capture, _, _ int) {
	a.size.Store(c.Samples)
	a.done.Store(0)
}

// Block is detect.BlockObserver's: one more block analysed.
func (a *Analysis) Block(in *detect.BlockInput, _ []detect.Finding) {
	a.done.Add(int64(len(in.Samples)))
}

// Done ends the analysis in progress.
func (a *Analysis) Done() {
	a.start.Store(0)
	a.size.Store(0)
	a.done.Store(0)
}

// AnalysisStarted marks the input's capture as being analysed from now;
// pass the returned Analysis to the pipeline (detect.WithObserver) and
// call its Done when the analysis ends.
func (s *Set) AnalysisStarted(input string) *Analysis {
	a := s.progress.entry(input)
	a.size.Store(0)
	a.done.Store(0)
	a.start.Store(time.Now().UnixNano())
	return a
}

// registerProgress adds the progress collector (see progress).
func (s *Set) registerProgress(Options) {
	s.reg.MustRegister(s.progress)
}
