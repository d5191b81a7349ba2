package ingest

import (
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"time"
)

// RawSettings say what a raw capture's name cannot: its format, sample
// rate, centre frequency and, for real-valued samples, the IF and LO side;
// and which files of a folder are raw captures (Pattern). They come from
// flags or from the watched folder's config entry. Nothing has a default:
// a raw file without a known rate is refused, one without a centre is
// analysed with the centre unknown.
type RawSettings struct {
	Format Format // FormatUnknown: from the file's ending
	// SampleRate is the file's rate in samples per second (real values per
	// second for real formats); required for raw files.
	SampleRate float64
	// CenterHz is the RF centre frequency, when HasCenter: the frequency
	// at 0 Hz of the analysed complex stream. For real-valued input it is
	// the RF of the IF band's centre (LO + IF on a low-side LO, LO − IF on
	// a high-side one), not the LO.
	CenterHz  float64
	HasCenter bool
	// IFHz and LOSide are for real-valued formats (see IFConversion); 0
	// and LOSideUnknown when not given. A SigMF recording's own
	// quietband:if_hz and quietband:lo_side take precedence; given both
	// ways they must agree.
	IFHz   float64
	LOSide LOSide
	// Pattern, when set, is a glob (path.Match syntax) on file names: Find
	// and the Watcher take files that match it as raw captures, whatever
	// their ending (sidecars excepted, see IsSidecar).
	Pattern string
	// Start is the time of the first sample. When zero, it is taken as the
	// file's modification time minus the capture duration (a recorder
	// closes the file after its last sample).
	Start time.Time
	// Spectrum sets the spectrum orientation of the input's captures, raw
	// and SigMF (see Orientation); OrientationAuto leaves it to the
	// satellites.
	Spectrum Orientation
}

// Segment is a stretch of a capture with one centre frequency and one
// time reference: SigMF capture segments, or the whole of a raw file.
type Segment struct {
	SampleStart int64
	CenterHz    float64
	HasCenter   bool
	Start       time.Time // time of SampleStart; zero when unknown
}

// Capture is an IQ recording ready to be read: its format, rate, timing
// and size, checked. It holds no samples.
//
// SampleRate and Samples describe the stream the detectors see, complex
// baseband: for a complex format the file's own samples; for a real format
// the complex stream the Reader makes of them (IFConversion), at half the
// file's rate. FileSampleRate and FileSamples describe the data file (real
// values for a real format); complex sample n is centred on file sample
// n·Decimation (FileSample). Segment sample indices count complex samples.
type Capture struct {
	Name       string // the path given to Open; callers may make it relative
	DataPath   string
	MetaPath   string // empty for raw files
	Format     Format
	SampleRate float64 // complex samples per second, as analysed
	Samples    int64   // number of complex samples analysed
	// FileSampleRate and FileSamples are the data file's rate and number
	// of samples (real values for a real format).
	FileSampleRate float64
	FileSamples    int64
	// Decimation is FileSampleRate/SampleRate: 1 for complex formats, 2
	// for real ones.
	Decimation int
	// IF is how a real-valued capture becomes complex baseband; zero for
	// complex formats.
	IF IFConversion
	// Spectrum is the orientation the input's configuration set
	// (RawSettings.Spectrum): OrientationInverted makes the Reader
	// conjugate every sample, so the stream analysed is upright.
	Spectrum  Orientation
	DataBytes int64
	Segments  []Segment // at least one, ascending SampleStart
	Meta      *Meta     // nil for raw files
	// TimeSource says where the start time came from (TimeFromMetadata,
	// TimeFromSettings, TimeFromFileMtime), "" when the capture has none.
	TimeSource string
	// TimeProblem, when set, says why the capture has no start time
	// although its source gave one (see trustTime): a sentence for the
	// capture record's notes.
	TimeProblem string
}

// lastWritableTime is the last instant RFC 3339 can write: its years have
// four digits (RFC 3339, section 5.6, date-fullyear = 4DIGIT).
var lastWritableTime = time.Date(9999, 12, 31, 23, 59, 59, 999999999, time.UTC)

// trustTime drops the start times of a capture that would end after
// lastWritableTime (issue 17, item 13: a capture dated 9999-12-31T23:59:59.9Z
// gave an event ending in year 10000, which RFC 3339 readers reject, and
// with it the whole log or answer): the capture is analysed without a
// start time, and TimeProblem says so.
func (c *Capture) trustTime() {
	start := c.Start()
	if start.IsZero() {
		return
	}
	last := start
	for _, s := range c.Segments {
		if s.Start.After(last) {
			last = s.Start
		}
	}
	if !last.Add(c.Duration()).After(lastWritableTime) {
		return
	}
	c.TimeProblem = fmt.Sprintf("start time not used: from %s (%s) the capture would end after %s, which RFC 3339 cannot write",
		c.TimeSource, start.UTC().Format(time.RFC3339Nano), lastWritableTime.Format(time.RFC3339))
	for i := range c.Segments {
		c.Segments[i].Start = time.Time{}
	}
	c.TimeSource = ""
}

// Where a capture's start time came from (Capture.TimeSource; the capture
// record's time_source).
const (
	TimeFromMetadata  = "core:datetime"          // the SigMF metadata
	TimeFromSettings  = "settings"               // the raw input's configured start
	TimeFromFileMtime = "file modification time" // a raw file's mtime minus its duration
)

// FileSample is the index in the data file of the sample on which complex
// sample n is centred.
func (c *Capture) FileSample(n int64) int64 { return n * int64(c.Decimation) }

// CenterHz is the centre frequency of the first segment and whether it is
// known.
func (c *Capture) CenterHz() (float64, bool) { return c.Segments[0].CenterHz, c.Segments[0].HasCenter }

// Start is the time of the first sample (zero when unknown).
func (c *Capture) Start() time.Time { return c.Segments[0].Start }

// Duration is the capture length.
func (c *Capture) Duration() time.Duration {
	return time.Duration(float64(c.Samples) / c.SampleRate * float64(time.Second))
}

// SampleTime returns the time of sample n using the segment that holds it.
func (c *Capture) SampleTime(n int64) time.Time {
	seg := c.SegmentAt(n)
	if seg.Start.IsZero() {
		return time.Time{}
	}
	return seg.Start.Add(time.Duration(float64(n-seg.SampleStart) / c.SampleRate * float64(time.Second)))
}

// SegmentAt returns the segment that holds sample n.
func (c *Capture) SegmentAt(n int64) Segment {
	seg := c.Segments[0]
	for _, s := range c.Segments[1:] {
		if s.SampleStart > n {
			break
		}
		seg = s
	}
	return seg
}

// IsCaptureFile reports whether path names something Open can take
// without further settings: a SigMF metadata or data file, or a raw file
// with a format ending. RawSettings.IsCapture adds the settings' Pattern.
func IsCaptureFile(path string) bool { return RawSettings{}.IsCapture(path) }

// IsCapture reports whether path is a capture file under these settings:
// as IsCaptureFile, or a file whose name matches s.Pattern; never a sidecar
// (IsSidecar).
func (s RawSettings) IsCapture(path string) bool {
	ext := strings.ToLower(filepath.Ext(path))
	if ext == MetaExt || ext == DataExt {
		return true
	}
	if IsSidecar(path) {
		return false
	}
	if _, ok := FormatForExtension(ext); ok {
		return true
	}
	if s.Pattern != "" {
		ok, _ := filepath.Match(s.Pattern, filepath.Base(path))
		return ok
	}
	return false
}

// HasRawDataEnding reports whether path ends as recorders commonly name
// raw samples without saying their format: .bin, .dat, .iq, .raw (common
// practice). Such a file is a capture only when a pattern takes it (or it
// is named on its own with a format); the Watcher warns about the others
// rather than pass them over in silence.
func HasRawDataEnding(path string) bool {
	return rawDataEndings[strings.ToLower(filepath.Ext(path))] && !IsSidecar(path)
}

var rawDataEndings = map[string]bool{".bin": true, ".dat": true, ".iq": true, ".raw": true}

// IsSidecar reports whether path is a file that travels beside captures
// and never holds samples, whatever a pattern says: SigMF collections and
// archives, truth and other JSON, YAML, text, tables, pictures, pages,
// logs.
func IsSidecar(path string) bool {
	base := strings.ToLower(filepath.Base(path))
	if strings.HasSuffix(base, ".sigmf-meta") || strings.HasSuffix(base, ".truth.json") {
		return true
	}
	return sidecarEndings[filepath.Ext(base)]
}

var sidecarEndings = map[string]bool{
	".sigmf-collection": true, ".sigmf": true, ".json": true, ".jsonl": true, ".yaml": true, ".yml": true,
	".txt": true, ".md": true, ".csv": true, ".html": true, ".xml": true, ".png": true, ".jpg": true,
	".svg": true, ".pdf": true, ".log": true, ".gz": true, ".zip": true, ".tar": true, ".xz": true,
}

// CaptureError is a problem with one capture: the file and what is wrong.
type CaptureError struct {
	File    string
	Problem error
}

func (e *CaptureError) Error() string { return e.File + ": " + e.Problem.Error() }
func (e *CaptureError) Unwrap() error { return e.Problem }

func captureErr(file string, format string, args ...any) error {
	return &CaptureError{File: file, Problem: fmt.Errorf(format, args...)}
}

// Open checks a capture and returns its description. path is either file of
// a SigMF pair (the other is found beside it) or a raw file, which takes
// its format from raw.Format or its ending and its rate, centre and (real
// formats) IF and LO side from raw. A real-valued SigMF recording takes its
// IF and LO side from its quietband:if_hz and quietband:lo_side, else from
// raw. Every error is a *CaptureError naming the file and the problem, and
// for a missing setting the setting to give.
func Open(path string, raw RawSettings) (*Capture, error) {
	ext := strings.ToLower(filepath.Ext(path))
	open := openRaw
	if ext == MetaExt || ext == DataExt {
		open = openSigMF
	}
	c, err := open(path, raw)
	if err == nil {
		c.trustTime()
		c.Spectrum = raw.Spectrum
	}
	return c, err
}

func openSigMF(path string, raw RawSettings) (*Capture, error) {
	base := strings.TrimSuffix(path, filepath.Ext(path))
	metaPath, dataPath := base+MetaExt, base+DataExt
	f, err := os.Open(metaPath)
	if err != nil {
		return nil, captureErr(metaPath, "cannot read metadata: %w", unwrapPathError(err))
	}
	meta, err := ParseMeta(f)
	f.Close()
	if err != nil {
		return nil, &CaptureError{File: metaPath, Problem: err}
	}
	format, err := ParseFormat(meta.Global.Datatype)
	if err != nil {
		return nil, captureErr(metaPath, "core:datatype: %w", err)
	}
	if meta.Global.SampleRate == 0 {
		return nil, captureErr(metaPath, "global core:sample_rate is missing; detectors cannot run without a sample rate")
	}
	if meta.Global.Offset != 0 {
		return nil, captureErr(metaPath, "global core:offset %d is not supported (split recordings); only 0", meta.Global.Offset)
	}
	c := &Capture{Name: path, DataPath: dataPath, MetaPath: metaPath, Format: format, Meta: meta}
	if format.IsReal() {
		conv, err := sigmfIF(meta, raw)
		if err != nil {
			return nil, &CaptureError{File: metaPath, Problem: err}
		}
		c.IF = conv
	}
	if err := c.setRate(meta.Global.SampleRate); err != nil {
		return nil, &CaptureError{File: metaPath, Problem: err}
	}
	if err := c.statData(); err != nil {
		return nil, err
	}
	for i, s := range meta.Captures {
		if int64(s.SampleStart) >= c.FileSamples {
			return nil, captureErr(dataPath, "data holds %d samples but captures[%d] starts at sample %d (data shorter than the metadata claims)", c.FileSamples, i, s.SampleStart)
		}
		// A real segment starting at an odd file sample starts with the
		// complex sample centred just before it.
		c.Segments = append(c.Segments, Segment{SampleStart: int64(s.SampleStart) / int64(c.Decimation), CenterHz: s.Frequency,
			HasCenter: s.HasFrequency, Start: s.Datetime})
	}
	for i, a := range meta.Annotations {
		end := a.SampleStart
		if a.SampleCount != nil {
			end += *a.SampleCount
		}
		if end > uint64(c.FileSamples) {
			return nil, captureErr(dataPath, "data holds %d samples but annotations[%d] reaches sample %d (data shorter than the metadata claims)", c.FileSamples, i, end)
		}
	}
	if len(c.Segments) == 0 || c.Segments[0].SampleStart != 0 {
		// SigMF: an empty captures array means one segment from sample 0;
		// samples before the first segment have no stated parameters.
		c.Segments = append([]Segment{{}}, c.Segments...)
	}
	if !c.Segments[0].Start.IsZero() {
		c.TimeSource = TimeFromMetadata
	}
	return c, nil
}

// The keys of quietband's SigMF extension namespace "quietband" (global
// object), for real-valued recordings, which SigMF's core cannot describe
// fully: quietband:if_hz (number, Hz: the centre of the wanted band in the
// real signal) and quietband:lo_side ("low": RF = LO + IF, upright; "high":
// RF = LO − IF, inverted). core:frequency of such a recording is the RF of
// the IF band's centre, as SigMF defines it ("the center frequency of the
// signal"). A writer declares the namespace in core:extensions as
// {"name": "quietband", "version": "1.0.0", "optional": true}: a reader
// without it can still read the samples.
const (
	ExtensionName    = "quietband"
	ExtensionVersion = "1.0.0"
	KeyIFHz          = "quietband:if_hz"
	KeyLOSide        = "quietband:lo_side"
)

// sigmfIF is the IF conversion of a real-valued SigMF recording: from its
// quietband:if_hz and quietband:lo_side, else from the raw settings; both
// given must agree.
func sigmfIF(meta *Meta, raw RawSettings) (IFConversion, error) {
	var conv IFConversion
	if v, ok := meta.Global.Extra[KeyIFHz]; ok {
		if err := json.Unmarshal(v, &conv.IFHz); err != nil || !(conv.IFHz > 0) {
			return conv, fmt.Errorf("global %s must be a positive number of Hz, got %s", KeyIFHz, clip(v))
		}
		if raw.IFHz != 0 && raw.IFHz != conv.IFHz {
			return conv, fmt.Errorf("global %s says %g Hz but the IF given (--if or the input's if_hz) is %g Hz", KeyIFHz, conv.IFHz, raw.IFHz)
		}
	} else {
		conv.IFHz = raw.IFHz
	}
	if v, ok := meta.Global.Extra[KeyLOSide]; ok {
		var side string
		err := json.Unmarshal(v, &side)
		if err == nil {
			conv.Side, err = ParseLOSide(side)
		}
		if err != nil {
			return conv, fmt.Errorf(`global %s must be "low" or "high", got %s`, KeyLOSide, clip(v))
		}
		if raw.LOSide != LOSideUnknown && raw.LOSide != conv.Side {
			return conv, fmt.Errorf("global %s says %s but the LO side given (--lo-side or the input's lo_side) is %s", KeyLOSide, conv.Side, raw.LOSide)
		}
	} else {
		conv.Side = raw.LOSide
	}
	return conv, nil
}

// setRate sets the file and analysis rates from the file's rate fs,
// checking the IF conversion of a real format.
func (c *Capture) setRate(fs float64) error {
	c.FileSampleRate, c.SampleRate, c.Decimation = fs, fs, 1
	if !c.Format.IsReal() {
		return nil
	}
	if err := c.IF.Check(fs); err != nil {
		return fmt.Errorf("real-valued samples (%s) are turned into complex baseband, and %w", c.Format, err)
	}
	c.SampleRate, c.Decimation = fs/2, 2
	return nil
}

func openRaw(path string, raw RawSettings) (*Capture, error) {
	if IsSidecar(path) {
		return nil, captureErr(path, "is a sidecar (%s file), not sample data", filepath.Ext(path))
	}
	format := raw.Format
	if format == FormatUnknown {
		f, ok := FormatForExtension(filepath.Ext(path))
		if !ok {
			return nil, captureErr(path, "no sample format: the ending %q names none; give --format (or the input's format) with a SigMF datatype such as ci8, ci16_le, cf32_le, ri8", filepath.Ext(path))
		}
		format = f
	}
	if raw.SampleRate == 0 {
		return nil, captureErr(path, "raw capture with no sample rate: give --rate (or the input's sample_rate), in samples per second of the file")
	}
	if !(raw.SampleRate > 0 && raw.SampleRate <= MaxSampleRate) {
		return nil, captureErr(path, "raw capture needs a sample rate > 0 and ≤ %g (got %g): set it with --rate or the input's sample_rate", float64(MaxSampleRate), raw.SampleRate)
	}
	c := &Capture{Name: path, DataPath: path, Format: format}
	if format.IsReal() {
		c.IF = IFConversion{IFHz: raw.IFHz, Side: raw.LOSide}
	}
	if err := c.setRate(raw.SampleRate); err != nil {
		return nil, &CaptureError{File: path, Problem: err}
	}
	if err := c.statData(); err != nil {
		return nil, err
	}
	start := raw.Start
	c.TimeSource = TimeFromSettings
	if start.IsZero() {
		c.TimeSource = ""
		if st, err := os.Stat(path); err == nil {
			start, c.TimeSource = st.ModTime().UTC().Add(-c.Duration()), TimeFromFileMtime
		}
	}
	c.Segments = []Segment{{CenterHz: raw.CenterHz, HasCenter: raw.HasCenter, Start: start.UTC()}}
	return c, nil
}

func (c *Capture) statData() error {
	st, err := os.Stat(c.DataPath)
	if err != nil {
		return captureErr(c.DataPath, "cannot read data: %w", unwrapPathError(err))
	}
	if !st.Mode().IsRegular() {
		return captureErr(c.DataPath, "not a regular file (%s)", st.Mode().Type())
	}
	f, err := os.Open(c.DataPath)
	if err != nil {
		return captureErr(c.DataPath, "cannot read data: %w", unwrapPathError(err))
	}
	f.Close()
	size := st.Size()
	if size == 0 {
		return captureErr(c.DataPath, "data file is empty (zero length)")
	}
	sb := int64(c.Format.SampleBytes())
	if rem := size % sb; rem != 0 {
		return captureErr(c.DataPath, "length %d bytes is not a whole number of %s samples (%d bytes each): %d stray bytes from byte offset %d",
			size, c.Format, sb, rem, size-rem)
	}
	c.DataBytes = size
	c.FileSamples = size / sb
	c.Samples = c.FileSamples / int64(c.Decimation)
	if c.Samples == 0 {
		return captureErr(c.DataPath, "data holds a single real sample; a complex sample takes two")
	}
	return nil
}

func unwrapPathError(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// Block is a run of consecutive samples of a capture.
type Block struct {
	Start int64 // index of Samples[0] in the capture
	// Samples are the block's samples, owned by the Reader: valid until the
	// next call of Next.
	Samples []complex64
	Clipped int // samples at a saturated code
	// Raw are the block's bytes as read, owned by the Reader: valid until
	// the next call of Next.
	Raw []byte
}

// Reader streams a capture in blocks of a fixed number of samples (the last
// one may be shorter). Memory is a few buffers of one block, whatever the
// capture size. It hashes the data as it goes (SHA-256 always; SHA-512 too
// when there is a core:sha512 to check); with more than one CPU the hashing
// runs on a goroutine of its own, up to three blocks behind, so that it
// overlaps the caller's work on the blocks, and with more than two CPUs
// SHA-256 and SHA-512, which are independent, run on a goroutine each.
// Close the Reader to stop those goroutines.
type Reader struct {
	src     io.Reader
	closer  io.Closer
	name    string
	format  Format
	raw     []byte
	bufs    [][]byte // raw buffers: one, or hashDepth+1 with hashing goroutines
	cur     int
	lanes   []hashLane // one per hashing goroutine; nil when hashing inline
	async   bool
	split   bool // SHA-256 and SHA-512 on a goroutine each
	closed  bool
	noHash  bool
	started bool // Next has been called
	blk     []complex64
	next    int64
	left    int64 // samples still expected; <0 when unknown
	sha256  hash.Hash
	sha512  hash.Hash
	want512 string
	done    bool

	// Real formats (conv != nil): the file is read ahead of the complex
	// samples by the conversion filter's reach.
	conv      *ifConverter
	fileRead  int64 // file samples read
	fileLeft  int64 // file samples still expected; <0 when unknown
	clipCarry int   // clipped complex samples already decoded for the next block

	levels   Levels
	levelsOK bool
	conj     bool // conjugate the samples handed out (Capture.Spectrum inverted)
	fe       *FrontEndCheck
}

// NewReader streams samples of complex format f from src in blocks of
// blockSamples. total is the number of samples expected (negative when
// unknown); name is used in errors. Real formats take NewIFReader.
func NewReader(src io.Reader, name string, f Format, blockSamples int, total int64) *Reader {
	if f.IsReal() {
		panic("ingest: NewReader of a real format (use NewIFReader)")
	}
	return newReader(src, name, f, blockSamples, total, blockSamples*f.SampleBytes())
}

func newReader(src io.Reader, name string, f Format, blockSamples int, total int64, rawBytes int) *Reader {
	if blockSamples < 1 {
		panic("ingest: block size must be positive")
	}
	r := &Reader{src: src, name: name, format: f, blk: samplePool.get(blockSamples), left: total, fileLeft: total, sha256: sha256.New()}
	r.bufs = [][]byte{rawPool.get(rawBytes)}
	r.raw = r.bufs[0]
	procs := runtime.GOMAXPROCS(0)
	r.async, r.split = procs > 1, procs > 2
	return r
}

// NewIFReader streams real samples of format f from src, at fs samples per
// second, as complex baseband at fs/2 (IFConversion) in blocks of
// blockSamples complex samples. fileSamples is the number of real samples
// expected (negative when unknown): the complex stream then holds
// fileSamples/2 samples, complex sample n centred on file sample 2n. The
// Reader reads ahead of the samples it returns by the filter's reach
// (2·hbK real samples); a Block's Raw are the bytes read by that call.
func NewIFReader(src io.Reader, name string, f Format, blockSamples int, fileSamples int64, fs float64, conv IFConversion) (*Reader, error) {
	if !f.IsReal() {
		return nil, captureErr(name, "NewIFReader of the complex format %s", f)
	}
	if err := conv.Check(fs); err != nil {
		return nil, captureErr(name, "%w", err)
	}
	total := int64(-1)
	if fileSamples >= 0 {
		total = fileSamples / 2
	}
	r := newReader(src, name, f, blockSamples, total, (2*blockSamples+2*hbK)*f.SampleBytes())
	r.fileLeft = fileSamples
	r.conv = newIFConverter(conv, fs, blockSamples)
	return r, nil
}

// CheckFrontEnd makes the Reader feed every sample it decodes to a
// FrontEndCheck (the file's own samples: the real values of a real
// format), whose result FrontEnd returns once the capture is read. It
// costs about a nanosecond per sample (BenchmarkFrontEndCheck). Call it
// before the first Next.
func (r *Reader) CheckFrontEnd() {
	if r.started {
		panic("ingest: CheckFrontEnd after Next")
	}
	r.fe = NewFrontEndCheck(r.format)
}

// FrontEnd is the front-end check of the samples read so far (see
// CheckFrontEnd); ok is false when the check was not asked for.
func (r *Reader) FrontEnd() (fe FrontEnd, ok bool) {
	if r.fe == nil {
		return FrontEnd{}, false
	}
	return r.fe.Result(), true
}

// Levels describes the distinct values of the file's first samples (see
// Levels); Measured is 0 before the first Next.
func (r *Reader) Levels() Levels { return r.levels }

// hashDepth is how many blocks the hashing goroutines may lag behind Next;
// the Reader then keeps hashDepth+1 raw buffers. Three rather than one:
// when the hashing, the caller's pass and a third goroutine (the
// pipeline's satellite meter) share two CPUs, a lag of one block kept the
// pass and the hashing waiting for each other whenever the scheduler ran
// the third (BenchmarkReplayModes/sha512=true/beside at -cpu 2, per 1 s
// capture at 10 MS/s: 121–130 ms with one, 107–113 ms with three; without
// a SHA-512 the same).
const hashDepth = 3

// hashLane is one hashing goroutine: the blocks sent to it, its
// acknowledgement of each, and how many acknowledgements are still owed.
type hashLane struct {
	req     chan []byte
	ack     chan struct{}
	pending int
}

// hasher writes the blocks sent to it, in order, into each of hs,
// acknowledging each block.
func hasher(req <-chan []byte, ack chan<- struct{}, hs ...hash.Hash) {
	for b := range req {
		for _, h := range hs {
			h.Write(b)
		}
		ack <- struct{}{}
	}
}

// wait waits until at most n blocks are owed by the lane.
func (l *hashLane) wait(n int) {
	for ; l.pending > n; l.pending-- {
		<-l.ack
	}
}

// SkipHash turns hashing off, for a second pass over a capture whose
// hashes another Reader computes; SHA256 then returns "". Call it before
// the first Next.
func (r *Reader) SkipHash() { r.noHash = true }

// hash hashes raw, on the hashing goroutines if there are any. The raw
// buffers rotate: raw is sent to every lane and Next reads the next block
// into the next buffer, which held the block hashDepth blocks back. Each
// lane is first let owe at most hashDepth−1 blocks, so that once raw is
// sent, the blocks in flight are the last hashDepth at most and the next
// buffer is no longer read.
func (r *Reader) hash(raw []byte) {
	if r.noHash {
		r.rotate()
		return
	}
	if r.async && r.lanes == nil && !r.closed {
		// Started on the first block, when the hashes are all set up.
		for len(r.bufs) < hashDepth+1 {
			r.bufs = append(r.bufs, rawPool.get(len(r.bufs[0])))
		}
		groups := [][]hash.Hash{{r.sha256}}
		if r.sha512 != nil {
			if r.split {
				groups = append(groups, []hash.Hash{r.sha512})
			} else {
				groups[0] = append(groups[0], r.sha512)
			}
		}
		for _, hs := range groups {
			l := hashLane{req: make(chan []byte, hashDepth), ack: make(chan struct{}, hashDepth)}
			go hasher(l.req, l.ack, hs...)
			r.lanes = append(r.lanes, l)
		}
	}
	if r.lanes == nil {
		r.sha256.Write(raw)
		if r.sha512 != nil {
			r.sha512.Write(raw)
		}
		r.rotate()
		return
	}
	for i := range r.lanes {
		l := &r.lanes[i]
		l.wait(hashDepth - 1)
		l.req <- raw
		l.pending++
	}
	r.rotate()
}

// rotate moves on to the next raw buffer, if there are several (for the
// hashing goroutines).
func (r *Reader) rotate() {
	if len(r.bufs) > 1 {
		r.cur = (r.cur + 1) % len(r.bufs)
		r.raw = r.bufs[r.cur]
	}
}

// waitHash waits for every block sent to be hashed.
func (r *Reader) waitHash() {
	for i := range r.lanes {
		r.lanes[i].wait(0)
	}
}

// NewReader opens the capture's data for streaming in blocks of
// blockSamples complex samples (of the analysed stream: a real format is
// converted to complex baseband). The caller closes the Reader.
func (c *Capture) NewReader(blockSamples int) (*Reader, error) {
	f, err := os.Open(c.DataPath)
	if err != nil {
		return nil, captureErr(c.DataPath, "cannot read data: %w", unwrapPathError(err))
	}
	var r *Reader
	if c.Format.IsReal() {
		r, err = NewIFReader(f, c.DataPath, c.Format, blockSamples, c.FileSamples, c.FileSampleRate, c.IF)
		if err != nil {
			f.Close()
			return nil, err
		}
	} else {
		r = NewReader(f, c.DataPath, c.Format, blockSamples, c.Samples)
	}
	r.closer = f
	r.conj = c.Spectrum == OrientationInverted
	if c.Meta != nil && c.Meta.Global.SHA512 != "" {
		r.sha512 = sha512.New()
		r.want512 = strings.ToLower(c.Meta.Global.SHA512)
	}
	return r, nil
}

// Next returns the next block, or io.EOF after the last. At the end it checks
// the length against what was expected and the core:sha512, if any.
func (r *Reader) Next() (Block, error) {
	b, err := r.nextBlock()
	if r.conj && err == nil {
		conjugate(b.Samples)
	}
	return b, err
}

// nextBlock is Next before the orientation's conjugation.
func (r *Reader) nextBlock() (Block, error) {
	if r.done {
		return Block{}, io.EOF
	}
	r.started = true
	if r.conv != nil {
		return r.nextReal()
	}
	sb := r.format.SampleBytes()
	want := len(r.blk)
	if r.left >= 0 && int64(want) > r.left {
		want = int(r.left)
	}
	if want == 0 {
		return Block{}, r.finish()
	}
	n, err := io.ReadFull(r.src, r.raw[:want*sb])
	if err == io.ErrUnexpectedEOF || err == io.EOF {
		if r.left >= 0 {
			return Block{}, captureErr(r.name, "data ends at byte offset %d, before the %d samples it held when opened (file shrank while being read?)", r.next*int64(sb)+int64(n), r.next+r.left)
		}
		if n%sb != 0 {
			return Block{}, captureErr(r.name, "data ends mid-sample at byte offset %d", r.next*int64(sb)+int64(n))
		}
		want = n / sb
		r.left = int64(want)
		err = nil
		if want == 0 {
			return Block{}, r.finish()
		}
	} else if err != nil {
		return Block{}, captureErr(r.name, "read error at byte offset %d: %w", r.next*int64(sb), err)
	}
	raw := r.raw[:want*sb]
	samples := r.blk[:want]
	clipped, bad := r.format.Decode(samples, raw)
	r.hash(raw)
	if bad > 0 {
		return Block{}, captureErr(r.name, "sample %d is NaN or infinite (%d such samples in this block)", r.next+int64(firstZeroedNaN(raw, r.format)), bad)
	}
	if !r.levelsOK {
		r.levels, r.levelsOK = levelsOfComplex(samples, r.format), true
	}
	if r.fe != nil {
		r.fe.AddComplex(samples)
	}
	b := Block{Start: r.next, Samples: samples, Clipped: clipped, Raw: raw}
	r.next += int64(want)
	if r.left >= 0 {
		r.left -= int64(want)
	}
	return b, nil
}

// nextReal is Next for a real format: it reads the file up to the pairs
// of real samples the block's complex samples need (hbK pairs ahead of
// them), decodes them two at a time as the complex twin's I and Q, and
// converts.
func (r *Reader) nextReal() (Block, error) {
	v := r.conv
	w := r.format.SampleBytes()
	m0 := r.next
	want := len(r.blk)
	if r.left >= 0 && int64(want) > r.left {
		want = int(r.left)
	}
	if want == 0 {
		return Block{}, r.finish()
	}
	v.compact(m0)
	need := 2 * (m0 + int64(want) + hbK) // file samples the block needs read
	if r.fileLeft >= 0 {
		need = min(need, r.fileRead+r.fileLeft)
	}
	var raw []byte
	clipped := r.clipCarry
	r.clipCarry = 0
	if n := need - r.fileRead; n > 0 {
		got, err := io.ReadFull(r.src, r.raw[:n*int64(w)])
		if err == io.ErrUnexpectedEOF || err == io.EOF {
			if r.fileLeft >= 0 {
				return Block{}, captureErr(r.name, "data ends at byte offset %d, before the %d samples it held when opened (file shrank while being read?)", r.fileRead*int64(w)+int64(got), r.fileRead+r.fileLeft)
			}
			if got%w != 0 {
				return Block{}, captureErr(r.name, "data ends mid-sample at byte offset %d", r.fileRead*int64(w)+int64(got))
			}
			n = int64(got / w)
			r.fileLeft = 0
			r.left = (r.fileRead+n)/2 - m0
			want = int(min(int64(want), r.left))
			err = nil
		} else if err != nil {
			return Block{}, captureErr(r.name, "read error at byte offset %d: %w", r.fileRead*int64(w), err)
		}
		raw = r.raw[:n*int64(w)]
		now, carry, bad := r.decodePairs(raw, m0+int64(want))
		r.hash(raw)
		if bad >= 0 {
			return Block{}, captureErr(r.name, "sample %d is NaN or infinite", r.fileRead+int64(bad))
		}
		clipped += now
		r.clipCarry = carry
		r.fileRead += n
		if r.fileLeft > 0 {
			r.fileLeft -= n
		}
	}
	if want == 0 {
		return Block{}, r.finish()
	}
	v.pad(m0 + int64(want) + hbK)
	samples := r.blk[:want]
	v.output(samples, m0)
	b := Block{Start: m0, Samples: samples, Clipped: clipped, Raw: raw}
	r.next += int64(want)
	r.left -= int64(want)
	return b, nil
}

// decodePairs decodes the real samples in raw (from file sample fileRead,
// which is even) into the converter's pairs, feeds the level count and the
// front-end check, and counts the clipped complex samples before pair
// index split (this block's) and from it on (the next block's). bad is the
// offset in raw's samples of the first NaN or infinite one, or −1.
func (r *Reader) decodePairs(raw []byte, split int64) (now, carry, bad int) {
	v := r.conv
	w := r.format.SampleBytes()
	twin := r.format.complexTwin()
	n := len(raw) / w
	p0 := r.fileRead / 2
	whole := n / 2
	dst := v.slot((n + 1) / 2)
	cut := int(max(0, min(int64(whole), split-p0)))
	c1, b1 := twin.Decode(dst[:cut], raw[:2*w*cut])
	c2, b2 := twin.Decode(dst[cut:whole], raw[2*w*cut:2*w*whole])
	now, carry = c1, c2
	if n%2 == 1 {
		// The file's odd last sample, with a zero after it.
		var one [1]float32
		c, b := r.format.DecodeReal(one[:], raw[2*w*whole:])
		dst[whole] = complex(one[0], 0)
		b2 += b
		if p0+int64(whole) < split {
			now += c
		} else {
			carry += c
		}
	}
	v.commit(len(dst))
	if b1+b2 > 0 {
		// Rare: find the first non-finite value.
		for i := range n {
			var one [1]float32
			if _, b := r.format.DecodeReal(one[:], raw[i*w:(i+1)*w]); b > 0 {
				return now, carry, i
			}
		}
	}
	reals := realsOf(dst)[:n]
	if !r.levelsOK {
		r.levels, r.levelsOK = levelsOfReal(reals, r.format), true
	}
	if r.fe != nil {
		r.fe.AddReal(reals)
	}
	return now, carry, -1
}

// firstZeroedNaN finds the first non-finite sample of a float block (rare
// path, only after Decode reported one).
func firstZeroedNaN(raw []byte, f Format) int {
	one := make([]complex64, 1)
	sb := f.SampleBytes()
	for i := 0; i*sb < len(raw); i++ {
		if _, bad := f.Decode(one, raw[i*sb:(i+1)*sb]); bad > 0 {
			return i
		}
	}
	return 0
}

func (r *Reader) finish() error {
	r.done = true
	if r.left < 0 {
		return io.EOF
	}
	// Anything past the expected length means the file grew while read.
	var one [1]byte
	if n, _ := r.src.Read(one[:]); n > 0 {
		held := r.next
		if r.conv != nil {
			held = r.fileRead
		}
		return captureErr(r.name, "data continues past the %d samples it held when opened (still being written?)", held)
	}
	r.waitHash()
	if r.sha512 != nil && !r.noHash {
		if got := hex.EncodeToString(r.sha512.Sum(nil)); got != r.want512 {
			return captureErr(r.name, "SHA-512 of the data is %s…, core:sha512 says %s… (data altered or incomplete)", got[:16], r.want512[:min(16, len(r.want512))])
		}
	}
	return io.EOF
}

// SHA256 is the lowercase hex SHA-256 of the bytes read so far; after
// io.EOF, of the whole data file.
func (r *Reader) SHA256() string {
	if r.noHash {
		return ""
	}
	r.waitHash()
	return hex.EncodeToString(r.sha256.Sum(nil))
}

// Close stops the hashing goroutine and closes the underlying file, if the
// Reader opened it.
func (r *Reader) Close() error {
	r.closed = true
	if r.lanes != nil {
		r.waitHash()
		for _, l := range r.lanes {
			close(l.req)
		}
		r.lanes = nil
	}
	// The buffers go back to the pools for the next Reader: no goroutine
	// uses them any more, and the caller may not use a Block after Close.
	if r.blk != nil {
		samplePool.put(r.blk)
	}
	for _, b := range r.bufs {
		rawPool.put(b)
	}
	if r.conv != nil {
		r.conv.release()
	}
	r.blk, r.bufs, r.raw = nil, nil, nil
	if r.closer != nil {
		return r.closer.Close()
	}
	return nil
}

// samplePool and rawPool keep the Readers' sample and raw buffers between
// captures: the daemon and replay read capture after capture with the same
// block size, and fresh buffers of megabytes each time cost page faults
// and zeroing (measured as system time on two CPUs, where a capture's
// buffers are several blocks).
var (
	samplePool bufferPool[complex64]
	rawPool    bufferPool[byte]
)

// bufferPool is a free list of buffers by length, at most
// maxPooledPerLength of each length and maxPooledLengths lengths (so its
// memory stays bounded whatever the captures).
type bufferPool[T any] struct {
	mu   sync.Mutex
	free map[int][][]T
}

const (
	maxPooledPerLength = 32
	maxPooledLengths   = 4
)

// get returns a buffer of length n, not cleared.
func (p *bufferPool[T]) get(n int) []T {
	p.mu.Lock()
	if l := p.free[n]; len(l) > 0 {
		b := l[len(l)-1]
		p.free[n] = l[:len(l)-1]
		p.mu.Unlock()
		return b
	}
	p.mu.Unlock()
	return make([]T, n)
}

// put gives b back, or drops it when the list is full.
func (p *bufferPool[T]) put(b []T) {
	if cap(b) == 0 {
		return
	}
	b = b[:cap(b)]
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.free == nil {
		p.free = map[int][][]T{}
	}
	l, ok := p.free[len(b)]
	if !ok && len(p.free) >= maxPooledLengths {
		return
	}
	if len(l) < maxPooledPerLength {
		p.free[len(b)] = append(l, b)
	}
}
