package ingest

import (
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"time"
)

// RawSettings say what a raw capture's name cannot: its sample rate, centre
// frequency and, optionally, format and start time. They come from flags or
// from the watched folder's config entry.
type RawSettings struct {
	Format     Format  // FormatUnknown: from the file extension
	SampleRate float64 // samples per second; required for raw files
	CenterHz   float64 // RF centre frequency, when HasCenter
	HasCenter  bool
	// Start is the time of the first sample. When zero, it is taken as the
	// file's modification time minus the capture duration (a recorder
	// closes the file after its last sample).
	Start time.Time
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
type Capture struct {
	Name       string // the path given to Open; callers may make it relative
	DataPath   string
	MetaPath   string // empty for raw files
	Format     Format
	SampleRate float64
	Samples    int64 // number of complex samples in the data file
	DataBytes  int64
	Segments   []Segment // at least one, ascending SampleStart
	Meta       *Meta     // nil for raw files
}

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

// IsCaptureFile reports whether path names something Open can take: a SigMF
// metadata or data file, or a raw file with a format extension.
func IsCaptureFile(path string) bool {
	ext := strings.ToLower(filepath.Ext(path))
	if ext == MetaExt || ext == DataExt {
		return true
	}
	_, ok := FormatForExtension(ext)
	return ok
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
// its format from raw.Format or its extension and its rate and centre from
// raw. Every error is a *CaptureError naming the file and the problem.
func Open(path string, raw RawSettings) (*Capture, error) {
	ext := strings.ToLower(filepath.Ext(path))
	if ext == MetaExt || ext == DataExt {
		return openSigMF(path)
	}
	return openRaw(path, raw)
}

func openSigMF(path string) (*Capture, error) {
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
	c := &Capture{Name: path, DataPath: dataPath, MetaPath: metaPath, Format: format,
		SampleRate: meta.Global.SampleRate, Meta: meta}
	if err := c.statData(); err != nil {
		return nil, err
	}
	for i, s := range meta.Captures {
		if int64(s.SampleStart) >= c.Samples {
			return nil, captureErr(dataPath, "data holds %d samples but captures[%d] starts at sample %d (data shorter than the metadata claims)", c.Samples, i, s.SampleStart)
		}
		c.Segments = append(c.Segments, Segment{SampleStart: int64(s.SampleStart), CenterHz: s.Frequency,
			HasCenter: s.HasFrequency, Start: s.Datetime})
	}
	for i, a := range meta.Annotations {
		end := a.SampleStart
		if a.SampleCount != nil {
			end += *a.SampleCount
		}
		if end > uint64(c.Samples) {
			return nil, captureErr(dataPath, "data holds %d samples but annotations[%d] reaches sample %d (data shorter than the metadata claims)", c.Samples, i, end)
		}
	}
	if len(c.Segments) == 0 || c.Segments[0].SampleStart != 0 {
		// SigMF: an empty captures array means one segment from sample 0;
		// samples before the first segment have no stated parameters.
		c.Segments = append([]Segment{{}}, c.Segments...)
	}
	return c, nil
}

func openRaw(path string, raw RawSettings) (*Capture, error) {
	format := raw.Format
	if format == FormatUnknown {
		f, ok := FormatForExtension(filepath.Ext(path))
		if !ok {
			return nil, captureErr(path, "no sample format: the extension %q names none and no format was configured", filepath.Ext(path))
		}
		format = f
	}
	if !(raw.SampleRate > 0 && raw.SampleRate <= MaxSampleRate) || math.IsNaN(raw.SampleRate) {
		return nil, captureErr(path, "raw capture needs a sample rate > 0 and ≤ %g (got %g): set it with --rate or the input's config", float64(MaxSampleRate), raw.SampleRate)
	}
	c := &Capture{Name: path, DataPath: path, Format: format, SampleRate: raw.SampleRate}
	if err := c.statData(); err != nil {
		return nil, err
	}
	start := raw.Start
	if start.IsZero() {
		if st, err := os.Stat(path); err == nil {
			start = st.ModTime().UTC().Add(-c.Duration())
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
	c.Samples = size / sb
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
	// next call of Next, or, after KeepBlocks(k), for the next k−1 calls
	// (the Reader rotates among k buffers).
	Samples []complex64
	Clipped int // samples at a saturated code
	// Raw are the block's bytes as read, owned by the Reader: valid until
	// the next call of Next, or, after KeepRaw(k), for the next k−1 calls.
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
	blks    [][]complex64 // KeepBlocks' rotation, blk among them; nil for one
	nextBuf int           // index in blks of the buffer the next block fills
	next    int64
	left    int64 // samples still expected; <0 when unknown
	sha256  hash.Hash
	sha512  hash.Hash
	want512 string
	done    bool
}

// NewReader streams samples of format f from src in blocks of blockSamples.
// total is the number of samples expected (negative when unknown); name is
// used in errors.
func NewReader(src io.Reader, name string, f Format, blockSamples int, total int64) *Reader {
	if blockSamples < 1 {
		panic("ingest: block size must be positive")
	}
	r := &Reader{src: src, name: name, format: f, blk: samplePool.get(blockSamples), left: total, sha256: sha256.New()}
	r.bufs = [][]byte{rawPool.get(blockSamples * f.SampleBytes())}
	r.raw = r.bufs[0]
	procs := runtime.GOMAXPROCS(0)
	r.async, r.split = procs > 1, procs > 2
	return r
}

// KeepBlocks makes the Reader rotate among k sample buffers, so that a
// Block's Samples stay valid for the next k−1 calls of Next (a consumer on
// another goroutine can still read a block while the caller fetches the
// following ones). Memory for samples is k blocks. The default is k = 1.
// Call it before the first Next; it panics if k < 1 or if Next was called.
func (r *Reader) KeepBlocks(k int) {
	if k < 1 {
		panic("ingest: KeepBlocks needs k ≥ 1")
	}
	if r.started {
		panic("ingest: KeepBlocks after Next")
	}
	if k == 1 {
		r.blks = nil
		return
	}
	r.blks = make([][]complex64, k)
	r.blks[0] = r.blk
	for i := 1; i < k; i++ {
		r.blks[i] = samplePool.get(len(r.blk))
	}
	r.nextBuf = 0
}

// KeepRaw makes the Reader rotate among at least k raw buffers, so that a
// Block's Raw bytes stay valid for the next k−1 calls of Next (a consumer
// on another goroutine can decode them itself, into memory of its own,
// while the caller fetches the following blocks). Memory for raw bytes is
// k blocks. Call it before the first Next; it panics if k < 1 or if Next
// was called.
func (r *Reader) KeepRaw(k int) {
	if k < 1 {
		panic("ingest: KeepRaw needs k ≥ 1")
	}
	if r.started {
		panic("ingest: KeepRaw after Next")
	}
	for len(r.bufs) < k {
		r.bufs = append(r.bufs, rawPool.get(len(r.bufs[0])))
	}
}

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
// hashing goroutines, or KeepRaw's).
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
// blockSamples. The caller closes the Reader.
func (c *Capture) NewReader(blockSamples int) (*Reader, error) {
	f, err := os.Open(c.DataPath)
	if err != nil {
		return nil, captureErr(c.DataPath, "cannot read data: %w", unwrapPathError(err))
	}
	r := NewReader(f, c.DataPath, c.Format, blockSamples, c.Samples)
	r.closer = f
	if c.Meta != nil && c.Meta.Global.SHA512 != "" {
		r.sha512 = sha512.New()
		r.want512 = strings.ToLower(c.Meta.Global.SHA512)
	}
	return r, nil
}

// Next returns the next block, or io.EOF after the last. At the end it checks
// the length against what was expected and the core:sha512, if any.
func (r *Reader) Next() (Block, error) {
	if r.done {
		return Block{}, io.EOF
	}
	r.started = true
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
	if r.blks != nil {
		r.blk = r.blks[r.nextBuf]
		r.nextBuf = (r.nextBuf + 1) % len(r.blks)
	}
	samples := r.blk[:want]
	clipped, bad := r.format.Decode(samples, raw)
	r.hash(raw)
	if bad > 0 {
		return Block{}, captureErr(r.name, "sample %d is NaN or infinite (%d such samples in this block)", r.next+int64(firstZeroedNaN(raw, r.format)), bad)
	}
	b := Block{Start: r.next, Samples: samples, Clipped: clipped, Raw: raw}
	r.next += int64(want)
	if r.left >= 0 {
		r.left -= int64(want)
	}
	return b, nil
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
		return captureErr(r.name, "data continues past the %d samples it held when opened (still being written?)", r.next)
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
	if r.blks != nil {
		for _, b := range r.blks {
			samplePool.put(b)
		}
	} else if r.blk != nil {
		samplePool.put(r.blk)
	}
	for _, b := range r.bufs {
		rawPool.put(b)
	}
	r.blk, r.blks, r.bufs, r.raw = nil, nil, nil, nil
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
