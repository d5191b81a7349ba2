// Package ingest brings IQ captures in and writes them out: every sample
// format SigMF names, complex (ci8, cu8, ci16, cf32 ... in both byte
// orders) and real (ri8, ri16, rf32 ...), SigMF metadata, a streaming
// block reader whose memory is bounded by the block size, capture writers,
// capture discovery (Find, FindRaw) and the directory watcher of the
// daemon (Watcher), and (in subpackages) the GPS C/A code and the
// synthesizer.
//
// Real-valued samples at an IF become complex baseband inside the Reader
// (IFConversion: mix by −IF, half-band filter, decimate by 2), so a
// Capture states both the file's rate and samples and the analysed ones.
// The Reader also says which levels the first samples take (Levels: 1- to
// 3-bit data) and, when asked, what a broken front end leaves in the
// samples (FrontEndCheck: dead, stuck, gaps of zeros, unnormalised floats).
//
// Every problem with a capture is a *CaptureError that names the file and
// says what is wrong, and for a missing setting (a raw file's rate, a real
// one's IF) which setting to give; nothing here panics on bad data, and
// nothing unknown is filled in with a default.
package ingest
