package fft

import "math"

// twiddle3 holds the three twiddle factors W^k, W^{2k} and W^{3k} that one
// radix-4 butterfly of a decimation-in-time stage multiplies its inputs by.
type twiddle3 struct {
	w1, w2, w3 complex64
}

// sqrtHalf is 1/√2 = cos(π/4), the magnitude of the real and imaginary parts
// of the odd eighth roots of unity used by the radix-8 first pass.
const sqrtHalf = float32(math.Sqrt2 / 2)

// first4 is the first pass of an n = 4^m point transform (n ≥ 4). For each
// c < n/4 it reads the subsequence src[c], src[c+n/4], src[c+n/2],
// src[c+3n/4] and writes its natural-order 4-point DFT to dst[4i:4i+4] with
// i = perm[c], the bit reversal of c over log2(n)−2 bits: this is the
// bit-reversed input ordering of decimation in time with the first two
// radix-2 levels done. (Bit reversal is an involution, so the same table
// would serve a gather loop over i; reading src in order was measured to be
// as fast for small n and 2–3× faster once src outgrows the L1 cache.)
// With inv set the kernel computes the e^{+j…} transform, whose output k is
// the forward output (4−k) mod 4.
func first4(dst, src []complex64, perm []int32, inv bool) {
	q := len(src) / 4
	s0 := src[0*q : 1*q]
	s1 := src[1*q : 2*q]
	s2 := src[2*q : 3*q]
	s3 := src[3*q : 4*q]
	i1, i3 := 1, 3
	if inv {
		i1, i3 = 3, 1
	}
	for c, v := range perm {
		i := int(v)
		x0, x1, x2, x3 := s0[c], s1[c], s2[c], s3[c]
		t0r, t0i := real(x0)+real(x2), imag(x0)+imag(x2)
		t1r, t1i := real(x0)-real(x2), imag(x0)-imag(x2)
		t2r, t2i := real(x1)+real(x3), imag(x1)+imag(x3)
		t3r, t3i := real(x1)-real(x3), imag(x1)-imag(x3)
		d := dst[4*i : 4*i+4 : 4*i+4]
		d[0] = complex(t0r+t2r, t0i+t2i)
		d[2] = complex(t0r-t2r, t0i-t2i)
		d[i1] = complex(t1r+t3i, t1i-t3r)
		d[i3] = complex(t1r-t3i, t1i+t3r)
	}
}

// first8 is the first pass of an n = 2·4^m point transform (n ≥ 8): like
// first4 but with the 8-point DFTs of the subsequences src[c+r·n/8],
// r = 0…7, written to dst[8i:8i+8], i = perm[c] being the bit reversal of c
// over log2(n)−3 bits. With inv set output k is the forward output
// (8−k) mod 8.
func first8(dst, src []complex64, perm []int32, inv bool) {
	q := len(src) / 8
	s0 := src[0*q : 1*q]
	s1 := src[1*q : 2*q]
	s2 := src[2*q : 3*q]
	s3 := src[3*q : 4*q]
	s4 := src[4*q : 5*q]
	s5 := src[5*q : 6*q]
	s6 := src[6*q : 7*q]
	s7 := src[7*q : 8*q]
	o1, o2, o3, o5, o6, o7 := 1, 2, 3, 5, 6, 7
	if inv {
		o1, o2, o3, o5, o6, o7 = 7, 6, 5, 3, 2, 1
	}
	for c, v := range perm {
		i := int(v)
		// Even samples: E = DFT4(x0, x2, x4, x6).
		x0, x2, x4, x6 := s0[c], s2[c], s4[c], s6[c]
		a0r, a0i := real(x0)+real(x4), imag(x0)+imag(x4)
		a1r, a1i := real(x0)-real(x4), imag(x0)-imag(x4)
		a2r, a2i := real(x2)+real(x6), imag(x2)+imag(x6)
		a3r, a3i := real(x2)-real(x6), imag(x2)-imag(x6)
		e0r, e0i := a0r+a2r, a0i+a2i
		e2r, e2i := a0r-a2r, a0i-a2i
		e1r, e1i := a1r+a3i, a1i-a3r
		e3r, e3i := a1r-a3i, a1i+a3r
		// Odd samples: O = DFT4(x1, x3, x5, x7).
		x1, x3, x5, x7 := s1[c], s3[c], s5[c], s7[c]
		b0r, b0i := real(x1)+real(x5), imag(x1)+imag(x5)
		b1r, b1i := real(x1)-real(x5), imag(x1)-imag(x5)
		b2r, b2i := real(x3)+real(x7), imag(x3)+imag(x7)
		b3r, b3i := real(x3)-real(x7), imag(x3)-imag(x7)
		f0r, f0i := b0r+b2r, b0i+b2i
		f2r, f2i := b0r-b2r, b0i-b2i
		f1r, f1i := b1r+b3i, b1i-b3r
		f3r, f3i := b1r-b3i, b1i+b3r
		// Twiddles W8^k·O[k]: W8 = (1−j)/√2, W8² = −j, W8³ = −(1+j)/√2.
		g1r, g1i := (f1r+f1i)*sqrtHalf, (f1i-f1r)*sqrtHalf
		g2r, g2i := f2i, -f2r
		g3r, g3i := (f3i-f3r)*sqrtHalf, -(f3r+f3i)*sqrtHalf
		d := dst[8*i : 8*i+8 : 8*i+8]
		d[0] = complex(e0r+f0r, e0i+f0i)
		d[4] = complex(e0r-f0r, e0i-f0i)
		d[o1] = complex(e1r+g1r, e1i+g1i)
		d[o5] = complex(e1r-g1r, e1i-g1i)
		d[o2] = complex(e2r+g2r, e2i+g2i)
		d[o6] = complex(e2r-g2r, e2i-g2i)
		d[o3] = complex(e3r+g3r, e3i+g3i)
		d[o7] = complex(e3r-g3r, e3i-g3i)
	}
}

// radix4 runs one in-place radix-4 decimation-in-time stage of size
// s = 4·len(tw) over x: every block x[b:b+s] holds four natural-order DFTs of
// length q = s/4 (of the residues 0, 2, 1, 3 mod 4 of the block's
// subsequence, as bit-reversed ordering leaves them) and is replaced by their
// length-s DFT
//
//	X[k+m·q] = Σ_{r=0}^{3} W4^{r·m} · W^{r·k} · Y_r[k],  W = e^{∓j2π/s}, W4 = e^{∓j2π/4}.
//
// tw[k] holds W^k, W^{2k}, W^{3k} for the direction wanted. The butterfly
// itself always uses the forward W4 = −j; with inv set (and conjugated
// twiddles) its rows m = 1 and m = 3 are stored swapped, since
// W4^{−m} = W4^{4−m}.
func radix4(x []complex64, tw []twiddle3, inv bool) {
	q := len(tw)
	s := 4 * q
	for b := 0; b+s <= len(x); b += s {
		blk := x[b : b+s : b+s]
		y0 := blk[0*q : 1*q]
		y2 := blk[1*q : 2*q]
		y1 := blk[2*q : 3*q]
		y3 := blk[3*q : 4*q]
		o1, o3 := y2, y3
		if inv {
			o1, o3 = y3, y2
		}
		_ = o1[len(tw)-1]
		_ = o3[len(tw)-1]
		// k = 0: all three twiddles are 1.
		{
			a, b, c, d := y0[0], y1[0], y2[0], y3[0]
			t0r, t0i := real(a)+real(c), imag(a)+imag(c)
			t1r, t1i := real(a)-real(c), imag(a)-imag(c)
			t2r, t2i := real(b)+real(d), imag(b)+imag(d)
			t3r, t3i := real(b)-real(d), imag(b)-imag(d)
			y0[0] = complex(t0r+t2r, t0i+t2i)
			y1[0] = complex(t0r-t2r, t0i-t2i)
			o1[0] = complex(t1r+t3i, t1i-t3r)
			o3[0] = complex(t1r-t3i, t1i+t3r)
		}
		y0, y1, y2, y3 = y0[:len(tw)], y1[:len(tw)], y2[:len(tw)], y3[:len(tw)]
		for k := 1; k < len(tw); k++ {
			w := tw[k]
			a := y0[k]
			u := y1[k]
			br := real(u)*real(w.w1) - imag(u)*imag(w.w1)
			bi := real(u)*imag(w.w1) + imag(u)*real(w.w1)
			u = y2[k]
			cr := real(u)*real(w.w2) - imag(u)*imag(w.w2)
			ci := real(u)*imag(w.w2) + imag(u)*real(w.w2)
			u = y3[k]
			dr := real(u)*real(w.w3) - imag(u)*imag(w.w3)
			di := real(u)*imag(w.w3) + imag(u)*real(w.w3)
			t0r, t0i := real(a)+cr, imag(a)+ci
			t1r, t1i := real(a)-cr, imag(a)-ci
			t2r, t2i := br+dr, bi+di
			t3r, t3i := br-dr, bi-di
			y0[k] = complex(t0r+t2r, t0i+t2i)
			y1[k] = complex(t0r-t2r, t0i-t2i)
			o1[k] = complex(t1r+t3i, t1i-t3r)
			o3[k] = complex(t1r-t3i, t1i+t3r)
		}
	}
}
