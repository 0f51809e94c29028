package dosemap

import "sync"

// scratch holds working buffers of Thermometry and the dose integration,
// reused from call to call through scratchPool, so that a review of many
// sonications does not claim fresh memory (and page faults) for each. A
// buffer handed out is zeroed and valid until the scratch is put back;
// nothing returned to a caller may refer to one.
type scratch struct {
	f64 bufs[float64]
	f32 bufs[float32]
	i32 bufs[int32]
	i16 bufs[int16]
	u32 bufs[uint32]
	b   bufs[bool]
}

// bufs is a list of reusable buffers of one type.
type bufs[T any] struct {
	list [][]T
	used int
}

// get returns the next buffer, of length n, zeroed.
func (b *bufs[T]) get(n int) []T {
	if b.used == len(b.list) {
		b.list = append(b.list, nil)
	}
	s := b.list[b.used]
	if cap(s) < n {
		s = make([]T, n)
	} else {
		s = s[:n]
		clear(s)
	}
	b.list[b.used] = s
	b.used++
	return s
}

var scratchPool = sync.Pool{New: func() any { return new(scratch) }}

// getScratch returns a scratch from the pool.
func getScratch() *scratch { return scratchPool.Get().(*scratch) }

// put hands every buffer of sc back for reuse.
func (sc *scratch) put() {
	sc.f64.used, sc.f32.used, sc.i32.used, sc.i16.used, sc.u32.used, sc.b.used = 0, 0, 0, 0, 0, 0
	scratchPool.Put(sc)
}

// slabs holds released frame storage of temperature series by length.
var slabs sync.Map // int → *sync.Pool

// getSlab returns n float32 values, reused when a series of that size was
// released (not zeroed: the caller writes every value).
func getSlab(n int) []float32 {
	if p, ok := slabs.Load(n); ok {
		if s, ok := p.(*sync.Pool).Get().(*[]float32); ok && len(*s) == n {
			return *s
		}
	}
	return make([]float32, n)
}

// putSlab keeps s for getSlab.
func putSlab(s []float32) {
	p, _ := slabs.LoadOrStore(len(s), &sync.Pool{})
	p.(*sync.Pool).Put(&s)
}
