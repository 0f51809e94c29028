package dicomio

import (
	"encoding/binary"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"runtime"
	"strings"
	"testing"
)

// Stored-value decoding by PS3.5 8.1.1 (BitsAllocated, BitsStored, HighBit,
// PixelRepresentation two's complement). Expected values worked by hand;
// exact comparisons (small integers are exact in float32).
func TestDecodeStoredValues(t *testing.T) {
	forBothDecoders(t, testDecodeStoredValues)
}

// forBothDecoders runs test with the vector decoding kernel (where the
// processor has it) and without, so that the value tables and the scalar
// loops are checked on every machine.
func forBothDecoders(t *testing.T, test func(t *testing.T)) {
	for _, on := range []bool{true, false} {
		t.Run(fmt.Sprintf("vector=%v", on), func(t *testing.T) {
			defer setVectorDecode(setVectorDecode(on))
			test(t)
		})
	}
}

func testDecodeStoredValues(t *testing.T) {
	cases := []struct {
		name                     string
		alloc, stored, high, rep int
		big                      bool
		raw                      []uint32
		want                     []float32
	}{
		{"u8", 8, 8, 7, 0, false, []uint32{0, 200, 255}, []float32{0, 200, 255}},
		{"u16", 16, 16, 15, 0, false, []uint32{0, 40000, 65535}, []float32{0, 40000, 65535}},
		{"s16", 16, 16, 15, 1, false, []uint32{0xFFFF, 0x8000, 0x7FFF}, []float32{-1, -32768, 32767}},
		{"s12 sign-extended", 16, 12, 11, 1, false, []uint32{0xF800, 0xFFFF, 0x07FF}, []float32{-2048, -1, 2047}},
		{"s12 masked", 16, 12, 11, 1, false, []uint32{0x0800, 0x0FFF, 0x07FF}, []float32{-2048, -1, 2047}},
		{"u12 with overlay bits", 16, 12, 11, 0, false, []uint32{0xF001, 0x0FFF}, []float32{1, 4095}},
		{"u12 high bit 15", 16, 12, 15, 0, false, []uint32{0x0010, 0xFFF0}, []float32{1, 4095}},
		{"s16 big endian", 16, 16, 15, 1, true, []uint32{0xFFFE, 0x0102}, []float32{-2, 258}},
		{"s32", 32, 32, 31, 1, false, []uint32{0xFFFFFFFF, 100000}, []float32{-1, 100000}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			bpp := c.alloc / 8
			raw := make([]byte, bpp*len(c.raw))
			for n, v := range c.raw {
				switch {
				case bpp == 1:
					raw[n] = byte(v)
				case bpp == 2 && c.big:
					binary.BigEndian.PutUint16(raw[2*n:], uint16(v))
				case bpp == 2:
					binary.LittleEndian.PutUint16(raw[2*n:], uint16(v))
				default:
					binary.LittleEndian.PutUint32(raw[4*n:], v)
				}
			}
			fi := &fileInfo{Rows: 1, Cols: len(c.raw), BitsAllocated: c.alloc, BitsStored: c.stored, HighBit: c.high, PixelRep: c.rep, BigEndian: c.big, Pixels: raw}
			dst := make([]float32, len(c.raw))
			fi.decodeFrame(0, dst, 1, 0, nil)
			for n := range dst {
				if dst[n] != c.want[n] {
					t.Errorf("value %d: %g, want %g", n, dst[n], c.want[n])
				}
			}
			// Rescale: 2*v - 1.
			fi.decodeFrame(0, dst, 2, -1, nil)
			for n := range dst {
				if dst[n] != 2*c.want[n]-1 {
					t.Errorf("rescaled %d: %g, want %g", n, dst[n], 2*c.want[n]-1)
				}
			}
			// The same values tiled over a 33×33 frame, decoded with value
			// tables (taken for layouts of at most 12 bits, four pixels at
			// a time and a tail of one): the hand-worked values, and the
			// same float32 as without tables for a mapping that is not
			// exact (the default phase scale π/2048).
			const side = 33
			big := &fileInfo{Rows: side, Cols: side, BitsAllocated: c.alloc, BitsStored: c.stored, HighBit: c.high, PixelRep: c.rep, BigEndian: c.big}
			for n := 0; n < side*side; n++ {
				big.Pixels = append(big.Pixels, raw[(n%len(c.raw))*bpp:(n%len(c.raw)+1)*bpp]...)
			}
			var tabs valueTables
			with, without := make([]float32, side*side), make([]float32, side*side)
			for _, ab := range [][2]float64{{1, 0}, {math.Pi / 2048, 0}, {math.Pi / 2048, -math.Pi}, {1, 0}} {
				big.decodeFrame(0, with, ab[0], ab[1], &tabs)
				big.decodeFrame(0, without, ab[0], ab[1], nil)
				for n := range with {
					if with[n] != without[n] {
						t.Fatalf("a=%g b=%g pixel %d: %g with tables, %g without", ab[0], ab[1], n, with[n], without[n])
					}
					if ab == [2]float64{1, 0} && with[n] != c.want[n%len(c.raw)] {
						t.Fatalf("tiled pixel %d: %g, want %g", n, with[n], c.want[n%len(c.raw)])
					}
				}
			}
		})
	}
}

// Default phase mapping onto [-π, π): the extremes of the stored range.
func TestPhaseLinear(t *testing.T) {
	for _, c := range []struct {
		bits, rep int
		lo, hi    float64 // smallest and largest stored values
	}{{12, 0, 0, 4095}, {12, 1, -2048, 2047}, {16, 0, 0, 65535}, {16, 1, -32768, 32767}} {
		fi := &fileInfo{BitsStored: c.bits, PixelRep: c.rep}
		a, b := fi.phaseLinear(0)
		step := math.Pi / math.Ldexp(1, c.bits-1)
		if got := a*c.lo + b; math.Abs(got+math.Pi) > 1e-12 {
			t.Errorf("%+v: lowest -> %g, want -π", c, got)
		}
		if got := a*c.hi + b; math.Abs(got-(math.Pi-step)) > 1e-12 {
			t.Errorf("%+v: highest -> %g, want π - step", c, got)
		}
		if a2, _ := fi.phaseLinear(0.001); a2 != 0.001 {
			t.Errorf("PhaseScale override ignored")
		}
	}
}

// A corrupt length must be rejected before the DICOM library allocates
// the buffer it declares (here 4 GB).
func TestHugeDeclaredLength(t *testing.T) {
	dir := t.TempDir()
	mrSpec{Dir: dir, SeriesUID: "2.25.901", FoR: testFoR, Number: 1, Cols: 4, Rows: 4, Slices: 1, Times: 1,
		Spacing: 1, SliceGap: 1}.write(t)
	paths, _ := listFiles(dir)
	data, err := os.ReadFile(paths[0])
	if err != nil {
		t.Fatal(err)
	}
	// Append (0011,0010) OB with length 0xFFFFFFF0 (explicit VR LE).
	data = append(data, 0x11, 0x00, 0x10, 0x00, 'O', 'B', 0, 0, 0xF0, 0xFF, 0xFF, 0xFF, 1, 2, 3, 4)
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	_, err = readBytes("huge", data, true)
	runtime.ReadMemStats(&after)
	if err == nil || !strings.Contains(err.Error(), "truncated or corrupt") {
		t.Errorf("reason %v, want truncated or corrupt", err)
	}
	if d := after.TotalAlloc - before.TotalAlloc; d > 64<<20 {
		t.Errorf("allocated %d MB reading a 1 kB file", d>>20)
	}
}

// TestDecodeLittleEndianWords checks every path of 16-bit little-endian
// decoding (the vector kernel where the processor has it, value tables,
// the scalar loops) against the stored value worked out bit by bit here
// from PS3.5 8.1.1 (bits HighBit−BitsStored+1 to HighBit, two's complement
// when PixelRepresentation is 1) and mapped as float32(v·a + b), the
// product and the sum each rounded to float64 (the explicit conversion
// forbids a fused multiply-add): exact equality. Layouts of 1 to 16 stored
// bits at every high bit, frame lengths that leave a tail after the
// blocks of eight and four, and seeded random words with overlay bits.
func TestDecodeLittleEndianWords(t *testing.T) {
	forBothDecoders(t, testDecodeLittleEndianWords)
}

func testDecodeLittleEndianWords(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	maps := [][2]float64{{1, 0}, {math.Pi / 2048, -math.Pi}, {0.37, 12.5}, {-2.5e-3, 0}}
	for bits := 1; bits <= 16; bits++ {
		for high := bits - 1; high < 16; high++ {
			for _, signed := range []bool{false, true} {
				for _, npix := range []int{8, 13, 1024, 1030} {
					fi := &fileInfo{Rows: 1, Cols: npix, BitsAllocated: 16, BitsStored: bits, HighBit: high, Pixels: make([]byte, 2*npix)}
					if signed {
						fi.PixelRep = 1
					}
					words := make([]uint16, npix)
					for n := range words {
						words[n] = uint16(rng.Uint32())
						binary.LittleEndian.PutUint16(fi.Pixels[2*n:], words[n])
					}
					ab := maps[rng.IntN(len(maps))]
					var tabs valueTables
					for _, tb := range []*valueTables{nil, &tabs} {
						dst := make([]float32, npix)
						fi.decodeFrame(0, dst, ab[0], ab[1], tb)
						for n, w := range words {
							low := high - bits + 1
							v := int64(w>>low) & (1<<bits - 1)
							if signed && v >= 1<<(bits-1) {
								v -= 1 << bits
							}
							want := float32(float64(float64(v)*ab[0]) + ab[1])
							if dst[n] != want {
								t.Fatalf("bits %d high %d signed %v npix %d a=%g b=%g word %#04x (pixel %d): %g, want %g (stored %d)",
									bits, high, signed, npix, ab[0], ab[1], w, n, dst[n], want, v)
							}
						}
					}
				}
			}
		}
	}
}
