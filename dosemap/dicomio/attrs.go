package dicomio

import (
	"strconv"
	"strings"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// elems is one level of a DICOM dataset: the top level of a file or one item
// of a sequence. Lookups walk the slice directly; the library's nested search
// is not used (it starts a goroutine per call).
type elems []*dicom.Element

func (es elems) find(t tag.Tag) *dicom.Element {
	for _, e := range es {
		if e != nil && e.Tag == t {
			return e
		}
	}
	return nil
}

// has reports whether t is present with a non-empty value.
func (es elems) has(t tag.Tag) bool {
	e := es.find(t)
	if e == nil || e.Value == nil {
		return false
	}
	switch v := e.Value.GetValue().(type) {
	case []string:
		return len(v) > 0 && !(len(v) == 1 && strings.TrimSpace(v[0]) == "")
	case []int:
		return len(v) > 0
	case []float64:
		return len(v) > 0
	case []byte:
		return len(v) > 0
	}
	return true
}

// strs returns the string values of t (nil when absent or not a string).
func (es elems) strs(t tag.Tag) []string {
	e := es.find(t)
	if e == nil || e.Value == nil {
		return nil
	}
	v, _ := e.Value.GetValue().([]string)
	return v
}

// str returns the first string value of t, trimmed; "" when absent.
func (es elems) str(t tag.Tag) string {
	v := es.strs(t)
	if len(v) == 0 {
		return ""
	}
	return strings.TrimSpace(v[0])
}

// floats returns the numeric values of t whatever the VR: DS and IS arrive
// as strings, FL/FD as floats, US/SS/UL/SL as ints. ok is false when t is
// absent or a value does not parse.
func (es elems) floats(t tag.Tag) ([]float64, bool) {
	e := es.find(t)
	if e == nil || e.Value == nil {
		return nil, false
	}
	switch v := e.Value.GetValue().(type) {
	case []float64:
		return v, len(v) > 0
	case []int:
		out := make([]float64, len(v))
		for n, x := range v {
			out[n] = float64(x)
		}
		return out, len(v) > 0
	case []string:
		out := make([]float64, 0, len(v))
		for _, s := range v {
			s = strings.TrimSpace(s)
			if s == "" {
				continue
			}
			x, err := strconv.ParseFloat(s, 64)
			if err != nil {
				return nil, false
			}
			out = append(out, x)
		}
		return out, len(out) > 0
	}
	return nil, false
}

// float returns the first numeric value of t.
func (es elems) float(t tag.Tag) (float64, bool) {
	v, ok := es.floats(t)
	if !ok {
		return 0, false
	}
	return v[0], true
}

// int returns the first numeric value of t as an int.
func (es elems) int(t tag.Tag) (int, bool) {
	v, ok := es.float(t)
	if !ok || v != v || v > 1<<31 || v < -(1<<31) {
		return 0, false
	}
	return int(v), true
}

// items returns the items of sequence t (nil when absent or not a sequence).
func (es elems) items(t tag.Tag) []elems {
	e := es.find(t)
	if e == nil || e.Value == nil {
		return nil
	}
	seq, ok := e.Value.GetValue().([]*dicom.SequenceItemValue)
	if !ok {
		return nil
	}
	out := make([]elems, 0, len(seq))
	for _, it := range seq {
		if it == nil {
			continue
		}
		sub, _ := it.GetValue().([]*dicom.Element)
		out = append(out, elems(sub))
	}
	return out
}

// first returns the first item of sequence t, or nil.
func (es elems) first(t tag.Tag) elems {
	it := es.items(t)
	if len(it) == 0 {
		return nil
	}
	return it[0]
}

// tagName returns "Keyword (gggg,eeee)" for messages.
func tagName(t tag.Tag) string {
	if info, err := tag.Find(t); err == nil {
		return info.Keyword + " " + t.String()
	}
	return t.String()
}
