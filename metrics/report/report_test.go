package report

import (
	"crypto/sha256"
	"encoding/base64"
	"encoding/json"
	"html"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"quietband/detect"
	"quietband/ingest/synth"
)

// TestReportPage builds a report of a clean capture, a capture with a tone
// and a quarantined capture with a hostile name, and checks the page:
// file-derived text escaped, every image present with its stated size,
// nothing fetched from elsewhere, and the Content-Security-Policy hashes
// naming exactly the inline style and script (CSP Level 3 hash-source:
// base64 of SHA-256 of the element's text).
func TestReportPage(t *testing.T) {
	dir := t.TempDir()
	obs := runScenario(t, filepath.Join(dir, "caps"), scenario(4e6,
		synth.Capture{Name: "clean", DurationS: 0.06},
		synth.Capture{Name: "tone", DurationS: 0.08, Emitters: []synth.Emitter{{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 500e3, JNDB: 6}}}}}))
	out := filepath.Join(dir, "report")
	rep, err := New(out, Options{Source: "test <captures>"})
	if err != nil {
		t.Fatal(err)
	}
	for _, ob := range obs {
		if err := rep.Add(Capture{Record: ob.result.Record, Events: ob.result.Events, Summary: ob.summary}); err != nil {
			t.Fatal(err)
		}
	}
	hostile := `<script>alert("x")</script>&'.sigmf-meta`
	if err := rep.Add(Capture{Record: detect.CaptureRecord{Capture: hostile, Status: detect.StatusQuarantined,
		Error: `<img src=x onerror=alert(1)> bad header`}}); err != nil {
		t.Fatal(err)
	}
	if err := rep.Close(); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(out, "index.html"))
	if err != nil {
		t.Fatal(err)
	}
	page := string(b)
	for _, bad := range []string{`<script>alert`, `<img src=x`, "ZgotmplZ", "http://", "https://", "<captures>"} {
		if strings.Contains(page, bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	for _, want := range []string{"&lt;script&gt;alert(&#34;x&#34;)&lt;/script&gt;&amp;&#39;.sigmf-meta", "&lt;img src=x onerror=alert(1)&gt; bad header"} {
		if !strings.Contains(page, want) {
			t.Errorf("page lacks the escaped text %q", want)
		}
	}
	imgs := regexp.MustCompile(`<img src="([^"]+)" width="(\d+)" height="(\d+)"`).FindAllStringSubmatch(page, -1)
	// The timeline, and four pictures of the capture with the tone.
	if len(imgs) != 5 || len(obs[1].result.Events) == 0 || len(obs[0].result.Events) != 0 {
		t.Fatalf("%d images on the page for %d and %d events", len(imgs), len(obs[0].result.Events), len(obs[1].result.Events))
	}
	for _, m := range imgs {
		if strings.Contains(m[1], "/") || strings.Contains(m[1], ":") {
			t.Errorf("image %q is not a file beside the page", m[1])
		}
		img := decodePNG(t, filepath.Join(out, html.UnescapeString(m[1])))
		w, _ := strconv.Atoi(m[2])
		h, _ := strconv.Atoi(m[3])
		if img.Bounds().Dx() != w || img.Bounds().Dy() != h {
			t.Errorf("%s is %v, the page says %d×%d", m[1], img.Bounds(), w, h)
		}
	}
	for _, m := range regexp.MustCompile(`href="([^"]*)"`).FindAllStringSubmatch(page, -1) {
		if !strings.HasPrefix(m[1], "#") {
			t.Errorf("link %q leaves the page", m[1])
		}
	}
	csp := regexp.MustCompile(`http-equiv="Content-Security-Policy" content="([^"]+)"`).FindStringSubmatch(page)
	if csp == nil {
		t.Fatal("no Content-Security-Policy")
	}
	policy := html.UnescapeString(csp[1])
	for _, el := range []struct{ tag, directive string }{{"style", "style-src"}, {"script", "script-src"}} {
		body := regexp.MustCompile(`(?s)<` + el.tag + `>(.*?)</` + el.tag + `>`).FindStringSubmatch(page)
		if body == nil {
			t.Fatalf("no inline %s", el.tag)
		}
		h := sha256.Sum256([]byte(body[1]))
		want := el.directive + " 'sha256-" + base64.StdEncoding.EncodeToString(h[:]) + "'"
		if !strings.Contains(policy, want) {
			t.Errorf("policy %q lacks %q", policy, want)
		}
	}
	if !strings.Contains(policy, "default-src 'none'") || !strings.Contains(policy, "img-src 'self'") {
		t.Errorf("policy %q does not confine the page", policy)
	}

	var doc struct {
		Captures []struct {
			Capture  string   `json:"capture"`
			Pictures []Layout `json:"pictures"`
		} `json:"captures"`
		Timeline Layout `json:"timeline"`
	}
	js, err := os.ReadFile(filepath.Join(out, "report.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(js, &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Captures) != 3 || len(doc.Captures[1].Pictures) != 4 || doc.Captures[2].Capture != hostile || doc.Timeline.File != "timeline.png" {
		t.Errorf("report.json: %s", js)
	}
	for _, p := range doc.Captures[1].Pictures {
		if _, err := os.Stat(filepath.Join(out, p.File)); err != nil {
			t.Error(err)
		}
	}
}

// TestClassTotals: interference time is the length of the union of the
// events' spans (worked by hand), worst values are maxima.
func TestClassTotals(t *testing.T) {
	t0 := time.Date(2026, 3, 14, 6, 0, 0, 0, time.UTC)
	ev := func(a, b float64, jn float64, loss *float64) detect.Event {
		e := detect.Event{Start: detect.Time{Time: t0.Add(time.Duration(a * 1e9))}, End: detect.Time{Time: t0.Add(time.Duration(b * 1e9))}, JNDB: jn}
		if loss != nil {
			e.Impact = &detect.Impact{CN0DegradationDB: *loss}
		}
		return e
	}
	cases := []struct {
		name   string
		events []detect.Event
		total  float64
		jn     float64
	}{
		{"disjoint", []detect.Event{ev(0, 1, 3, nil), ev(2, 2.5, 5, nil)}, 1.5, 5},
		{"overlapping", []detect.Event{ev(0, 1, 3, nil), ev(0.5, 2, 1, nil), ev(1.5, 1.8, 2, nil)}, 2, 3},
		{"nested and touching", []detect.Event{ev(0, 4, 1, nil), ev(1, 2, 9, nil), ev(4, 5, 0, nil)}, 5, 9},
		{"unsorted", []detect.Event{ev(10, 11, -2, nil), ev(0, 1, -1, nil)}, 2, -1},
	}
	for _, tc := range cases {
		var a classAcc
		for _, e := range tc.events {
			a.add(e, 4e6)
		}
		if got := a.total().Seconds(); math.Abs(got-tc.total) > 1e-9 || a.worstJN != tc.jn {
			t.Errorf("%s: total %g s, worst J/N %g; want %g s, %g", tc.name, got, a.worstJN, tc.total, tc.jn)
		}
	}
	// Untimed events count sample_count / rate.
	var a classAcc
	a.add(detect.Event{SampleCount: 2e6}, 4e6)
	if a.total() != 500*time.Millisecond {
		t.Errorf("untimed total %v, want 500ms", a.total())
	}
}

// TestTimeTicks: labels fall on whole multiples of a clock step, at most
// seven of them, inside the range.
func TestTimeTicks(t *testing.T) {
	base := float64(time.Date(2026, 3, 14, 6, 0, 7, 0, time.UTC).Unix())
	cases := []struct {
		span float64
		step float64
	}{{5, 1}, {40, 10}, {420, 60}, {3 * 3600, 1800}, {3 * 86400, 43200}, {60 * 86400, 1209600}}
	for _, tc := range cases {
		var labels int
		for _, tk := range (timeTicks{}).Ticks(base, base+tc.span) {
			if tk.IsMinor() {
				continue
			}
			labels++
			if math.Mod(tk.Value, tc.step) != 0 || tk.Value < base || tk.Value > base+tc.span {
				t.Errorf("span %g s: label at %g is not a multiple of %g s in range", tc.span, tk.Value, tc.step)
			}
		}
		if labels == 0 || labels > 7 {
			t.Errorf("span %g s: %d labels", tc.span, labels)
		}
	}
}
