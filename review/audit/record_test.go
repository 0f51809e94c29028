package audit

import (
	"math"
	"testing"
)

func TestNumCell(t *testing.T) {
	for _, c := range []struct {
		x    float64
		want string
	}{
		{4.257080078125001, "4.2571"},
		{0, "0"},
		{100, "100"},
		{-0.00001, "0"},
		{12.5, "12.5"},
		{math.NaN(), ""},
		{math.Inf(-1), ""},
	} {
		if got := Num(c.x).cell(); got != c.want {
			t.Errorf("cell(%v) = %q, want %q", c.x, got, c.want)
		}
	}
}
