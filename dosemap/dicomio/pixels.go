package dicomio

import (
	"encoding/binary"
	"math"
)

// storedReader returns the stored value of pixel n of frame f in fi.Pixels,
// honouring BitsAllocated, BitsStored, HighBit, PixelRepresentation and the
// byte order. The DICOM library ignores PixelRepresentation, so signed
// values are sign-extended here from bit BitsStored-1 (PS3.5 8.1.1).
func (fi *fileInfo) decodeFrame(frame int, dst []float32, a, b float64) {
	npix := fi.Rows * fi.Cols
	bpp := fi.BitsAllocated / 8
	raw := fi.Pixels[frame*npix*bpp : (frame+1)*npix*bpp]
	shift := uint(fi.HighBit + 1 - fi.BitsStored)
	bits := uint(fi.BitsStored)
	mask := uint32(1)<<bits - 1
	if bits >= 32 {
		mask = math.MaxUint32
	}
	signed := fi.PixelRep == 1
	sign := uint32(1) << (bits - 1)
	var bo binary.ByteOrder = binary.LittleEndian
	if fi.BigEndian {
		bo = binary.BigEndian
	}
	af, bf := float32(a), float32(b)
	exact := a == float64(af) && b == float64(bf)
	conv := func(u uint32) float32 {
		u = (u >> shift) & mask
		var v float64
		if signed && u&sign != 0 {
			v = float64(int64(u) - int64(1)<<bits)
		} else {
			v = float64(u)
		}
		if exact {
			return float32(v)*af + bf
		}
		return float32(v*a + b)
	}
	switch bpp {
	case 1:
		for n := range dst[:npix] {
			dst[n] = conv(uint32(raw[n]))
		}
	case 2:
		if !signed && shift == 0 && bits == 16 && !fi.BigEndian {
			// Fast path for plain unsigned 16-bit little-endian data.
			for n := range dst[:npix] {
				v := float64(uint16(raw[2*n]) | uint16(raw[2*n+1])<<8)
				dst[n] = float32(v*a + b)
			}
			return
		}
		if signed && shift == 0 && bits == 16 && !fi.BigEndian {
			for n := range dst[:npix] {
				v := float64(int16(uint16(raw[2*n]) | uint16(raw[2*n+1])<<8))
				dst[n] = float32(v*a + b)
			}
			return
		}
		for n := range dst[:npix] {
			dst[n] = conv(uint32(bo.Uint16(raw[2*n:])))
		}
	case 4:
		for n := range dst[:npix] {
			dst[n] = conv(bo.Uint32(raw[4*n:]))
		}
	}
}

// storedRange returns the smallest and largest stored values that
// BitsStored and PixelRepresentation allow.
func (fi *fileInfo) storedRange() (lo, hi float64) {
	if fi.PixelRep == 1 {
		return -math.Ldexp(1, fi.BitsStored-1), math.Ldexp(1, fi.BitsStored-1) - 1
	}
	return 0, math.Ldexp(1, fi.BitsStored) - 1
}

// phaseLinear returns a, b such that phase = a*stored + b radians when no
// RWV mapping in radians is present: the stored range maps linearly onto
// [-π, π): signed v·π/2^(BitsStored-1), unsigned (v - 2^(BitsStored-1))·π/2^(BitsStored-1).
// scale, when non-zero, replaces π/2^(BitsStored-1) (radians per stored unit).
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
