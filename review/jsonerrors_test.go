package review

import (
	"strings"
	"testing"
)

// TestReadContoursBadJSON: a contour file edited by hand and broken gets a
// message naming the file and where it breaks, in words.
func TestReadContoursBadJSON(t *testing.T) {
	for _, c := range []struct{ data, want string }{
		{`{"format": "x"`, "the file ends before the JSON is complete"},
		{`garbage`, "not valid JSON at byte 1"},
		{`{"format": 3}`, "format holds a JSON number where string is expected"},
		{``, "the file ends before the JSON is complete"},
	} {
		_, _, err := ReadContours(strings.NewReader(c.data), "plan.json")
		if err == nil || !strings.Contains(err.Error(), "plan.json") || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: got %v, want plan.json and %q", c.data, err, c.want)
		}
	}
}
