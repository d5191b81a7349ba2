// Package ingest brings IQ captures in and writes them out: the complex
// sample formats of SigMF (ci8, cu8, ci16, cf32 ... in both byte orders),
// SigMF metadata, a streaming block reader whose memory is bounded by the
// block size, capture writers, capture discovery (Find) and the directory
// watcher of the daemon (Watcher), and (in subpackages) the GPS C/A code and
// the synthesizer.
//
// Every problem with a capture is a *CaptureError that names the file and
// says what is wrong; nothing here panics on bad data.
package ingest
