package dicomio

import (
	"encoding/binary"
	"math"
)

// decodeFrame converts frame number frame of fi.Pixels into dst as
// a*stored + b. The stored value honours BitsAllocated, BitsStored, HighBit,
// PixelRepresentation and the byte order (PS3.5 8.1.1, PS3.3 C.7.6.3.1).
// The DICOM library ignores PixelRepresentation, so signed values are
// sign-extended here from bit BitsStored-1; bits above HighBit are masked
// off, so it does not matter whether the writer sign-extended them.
//
// Where the processor has the vector kernel (decode16AVX2), 16-bit
// little-endian words decode eight at a time. Elsewhere tabs, when not
// nil, keeps value tables for layouts of at most 12 stored bits in 16-bit
// little-endian words: frames that share the layout and the mapping then
// decode by lookup, to the same values.
func (fi *fileInfo) decodeFrame(frame int, dst []float32, a, b float64, tabs *valueTables) {
	npix := fi.Rows * fi.Cols
	bpp := fi.BitsAllocated / 8
	frame -= fi.firstFrame // fi.Pixels may hold only the frames asked for
	raw := fi.Pixels[frame*npix*bpp : (frame+1)*npix*bpp]
	dst = dst[:npix]
	if vectorDecode && bpp == 2 && !fi.BigEndian && fi.BitsStored >= 1 && fi.HighBit < 16 &&
		fi.BitsStored <= fi.HighBit+1 && npix >= 8 {
		// Little-endian words (the frames of a sonication): eight at a
		// time by the vector kernel; the tail (fewer than eight) by the
		// loops below, which go by the lengths of raw and dst.
		m := npix &^ 7
		up, ext := uint(31-fi.HighBit)&31, uint(32-fi.BitsStored)&31
		decode16AVX2(&raw[0], &dst[0], m, uint64(up), uint64(ext), fi.PixelRep == 1, a, b)
		if m == npix {
			return
		}
		raw, dst = raw[2*m:], dst[m:]
		tabs = nil // no table for a handful of values
	}
	if tabs != nil && bpp == 2 && !fi.BigEndian && fi.BitsStored >= 1 && fi.BitsStored <= 12 &&
		fi.HighBit < 16 && fi.BitsStored <= fi.HighBit+1 && npix >= 1024 {
		v := (*[tableLen]float32)(tabs.get(fi, a, b).v)
		shift := uint(fi.HighBit+1-fi.BitsStored) & 15
		mask := uint64(1)<<uint(fi.BitsStored) - 1
		raw = raw[:2*len(dst)]
		// Four words per 8-byte load: word k is bits 16k to 16k+15, and
		// its stored value the BitsStored bits from bit 16k+shift (which
		// end at or below bit 16k+15, so no bit of the next word enters).
		n := 0
		for ; n+4 <= len(dst); n += 4 {
			w := binary.LittleEndian.Uint64(raw[2*n : 2*n+8])
			d := dst[n : n+4 : n+4]
			d[0] = v[w>>shift&mask&(tableLen-1)]
			d[1] = v[w>>(16+shift)&mask&(tableLen-1)]
			d[2] = v[w>>(32+shift)&mask&(tableLen-1)]
			d[3] = v[w>>(48+shift)&mask&(tableLen-1)]
		}
		for ; n < len(dst); n++ {
			w := uint64(raw[2*n]) | uint64(raw[2*n+1])<<8
			dst[n] = v[w>>shift&mask&(tableLen-1)]
		}
		return
	}
	shift := uint(fi.HighBit + 1 - fi.BitsStored)
	bits := uint(fi.BitsStored)
	if bits > 32 {
		bits = 32
	}
	// ext = 32 - bits: (u << ext) as int32 >> ext sign-extends a value of
	// `bits` bits; for unsigned data the shift back is logical.
	ext := 32 - bits
	signed := fi.PixelRep == 1
	var bo binary.ByteOrder = binary.LittleEndian
	if fi.BigEndian {
		bo = binary.BigEndian
	}
	switch bpp {
	case 1:
		for n := range dst {
			dst[n] = float32(value(uint32(raw[n])>>shift, ext, signed)*a + b)
		}
	case 2:
		if shift == 0 && bits == 16 && !fi.BigEndian {
			// Plain 16-bit little-endian data.
			if signed {
				for n := range dst {
					dst[n] = float32(float64(int16(uint16(raw[2*n])|uint16(raw[2*n+1])<<8))*a + b)
				}
			} else {
				for n := range dst {
					dst[n] = float32(float64(uint16(raw[2*n])|uint16(raw[2*n+1])<<8)*a + b)
				}
			}
			return
		}
		if !fi.BigEndian && fi.HighBit < 16 && fi.BitsStored <= fi.HighBit+1 {
			// Little-endian with fewer stored bits: shifting bit HighBit
			// up to bit 31 drops the bits above it, and the shift back
			// down (arithmetic for signed data) leaves the value.
			// (Shift counts masked to 31 and the bytes indexed by the loop
			// variable spare the per-pixel range checks.)
			up, ext := uint(31-fi.HighBit)&31, ext&31
			raw = raw[:2*len(dst)]
			if signed {
				for i := 0; i+1 < len(raw); i += 2 {
					u := (uint32(raw[i]) | uint32(raw[i+1])<<8) << up
					dst[i>>1] = float32(float64(int32(u)>>ext)*a + b)
				}
			} else {
				for i := 0; i+1 < len(raw); i += 2 {
					u := (uint32(raw[i]) | uint32(raw[i+1])<<8) << up
					dst[i>>1] = float32(float64(u>>ext)*a + b)
				}
			}
			return
		}
		// General 16-bit case (big-endian, odd HighBit), without an
		// interface call per pixel.
		lo, hi := 0, 1
		if fi.BigEndian {
			lo, hi = 1, 0
		}
		if signed {
			for n := range dst {
				u := (uint32(raw[2*n+lo]) | uint32(raw[2*n+hi])<<8) >> shift << ext
				dst[n] = float32(float64(int32(u)>>ext)*a + b)
			}
		} else {
			for n := range dst {
				u := (uint32(raw[2*n+lo]) | uint32(raw[2*n+hi])<<8) >> shift << ext
				dst[n] = float32(float64(u>>ext)*a + b)
			}
		}
	case 4:
		for n := range dst {
			dst[n] = float32(value(bo.Uint32(raw[4*n:])>>shift, ext, signed)*a + b)
		}
	}
}

// value keeps the low 32-ext bits of u, sign-extended when signed.
func value(u uint32, ext uint, signed bool) float64 {
	u <<= ext
	if signed {
		return float64(int32(u) >> ext)
	}
	return float64(u >> ext)
}

// phaseLinear returns a, b such that phase = a*stored + b radians when no
// RWV mapping in radians is present: the stored range maps linearly onto
// [-π, π): signed v·π/2^(BitsStored-1), unsigned
// (v - 2^(BitsStored-1))·π/2^(BitsStored-1). scale, when non-zero,
// replaces π/2^(BitsStored-1) (radians per stored unit).
func (fi *fileInfo) phaseLinear(scale float64) (a, b float64) {
	half := math.Ldexp(1, fi.BitsStored-1)
	a = math.Pi / half
	if scale != 0 {
		a = scale
	}
	if fi.PixelRep == 1 {
		return a, 0
	}
	return a, -half * a
}

// tableLen is the length of a value table: one entry per bit pattern of
// up to 12 stored bits (entries past 2^BitsStored stay unused).
const tableLen = 1 << 12

// valueTable holds a*stored + b (as decodeFrame computes it) for every
// stored value of one pixel layout.
type valueTable struct {
	bits, highBit int
	signed        bool
	a, b          float64
	v             []float32 // by stored bit pattern, tableLen long
}

// valueTables keeps the tables of the last two layouts and mappings met
// (phase and magnitude files alternate).
type valueTables struct {
	t    [2]*valueTable
	next int
}

// get returns the table for fi's layout and the mapping a, b.
func (ts *valueTables) get(fi *fileInfo, a, b float64) *valueTable {
	signed := fi.PixelRep == 1
	for _, t := range ts.t {
		if t != nil && t.bits == fi.BitsStored && t.highBit == fi.HighBit && t.signed == signed && t.a == a && t.b == b {
			return t
		}
	}
	t := &valueTable{bits: fi.BitsStored, highBit: fi.HighBit, signed: signed, a: a, b: b, v: make([]float32, tableLen)}
	ext := uint(32 - fi.BitsStored)
	for s := range t.v[:1<<fi.BitsStored] {
		t.v[s] = float32(value(uint32(s), ext, signed)*a + b)
	}
	ts.t[ts.next] = t
	ts.next = 1 - ts.next
	return t
}
