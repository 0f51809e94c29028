package dicomio

import (
	"sort"
	"strconv"
	"strings"
	"time"
)

// parseDA parses a DICOM DA value (YYYYMMDD, or the old YYYY.MM.DD) into
// days since 1970-01-01.
func parseDA(s string) (int, bool) {
	s = strings.ReplaceAll(strings.TrimSpace(s), ".", "")
	if len(s) != 8 {
		return 0, false
	}
	t, err := time.Parse("20060102", s)
	if err != nil {
		return 0, false
	}
	return int(t.Unix() / 86400), true
}

// parseTM parses a DICOM TM value (HH, HHMM, HHMMSS, HHMMSS.FFFFFF, or the
// old HH:MM:SS.frac) into seconds after midnight.
func parseTM(s string) (float64, bool) {
	s = strings.ReplaceAll(strings.TrimSpace(s), ":", "")
	if len(s) < 2 {
		return 0, false
	}
	frac := 0.0
	if i := strings.IndexByte(s, '.'); i >= 0 {
		f, err := strconv.ParseFloat("0"+s[i:], 64)
		if err != nil {
			return 0, false
		}
		frac = f
		s = s[:i]
	}
	if len(s) != 2 && len(s) != 4 && len(s) != 6 {
		return 0, false
	}
	var parts [3]int
	for n := 0; n*2 < len(s); n++ {
		v, err := strconv.Atoi(s[2*n : 2*n+2])
		if err != nil || v < 0 {
			return 0, false
		}
		parts[n] = v
	}
	if parts[0] > 23 || parts[1] > 59 || parts[2] > 60 {
		return 0, false
	}
	return float64(parts[0]*3600+parts[1]*60+parts[2]) + frac, true
}

// parseDT parses a DICOM DT value (YYYYMMDDHHMMSS.FFFFFF, optional &ZZXX
// offset, which is ignored: times are compared as written).
func parseDT(s string) (clockTime, bool) {
	s = strings.TrimSpace(s)
	if i := strings.IndexAny(s, "+-"); i >= 0 {
		s = s[:i]
	}
	if len(s) < 8 {
		return clockTime{}, false
	}
	day, ok := parseDA(s[:8])
	if !ok {
		return clockTime{}, false
	}
	sec := 0.0
	if len(s) > 8 {
		if sec, ok = parseTM(s[8:]); !ok {
			return clockTime{}, false
		}
	}
	return clockTime{Day: day, Sec: sec, OK: true}, true
}

// unwrapMidnight corrects times of day that passed midnight. It applies only
// when the times carry no date or all share one date (scanners often write
// the series date on every frame): if the times span more than 12 hours
// with a gap of more than 12 hours between consecutive sorted values, the
// values below the gap belong to the next day and get 24 h added. Runs
// shorter than 12 hours are therefore never changed.
func unwrapMidnight(ts []clockTime) []float64 {
	out := make([]float64, len(ts))
	sameDay := true
	for n, t := range ts {
		out[n] = t.abs()
		if t.Day != ts[0].Day {
			sameDay = false
		}
	}
	if !sameDay || len(out) < 2 {
		return out
	}
	s := append([]float64(nil), out...)
	sort.Float64s(s)
	const half = 12 * 3600
	if s[len(s)-1]-s[0] <= half {
		return out
	}
	cut := 0.0
	for n := 1; n < len(s); n++ {
		if s[n]-s[n-1] > half {
			cut = s[n]
		}
	}
	if cut == 0 {
		return out
	}
	for n := range out {
		if out[n] < cut {
			out[n] += 86400
		}
	}
	return out
}

// toTime converts seconds since 1970 (dated) into a time.Time in UTC (the
// clock time as written in the files); undated times give the zero Time.
func toTime(sec float64, dated bool) time.Time {
	if !dated {
		return time.Time{}
	}
	whole := int64(sec)
	if float64(whole) > sec {
		whole--
	}
	return time.Unix(whole, int64((sec-float64(whole))*1e9+0.5)).UTC()
}

// clockString formats seconds since 1970 (or of day) as a time of day.
func clockString(sec float64) string {
	s := int64(sec) % 86400
	if s < 0 {
		s += 86400
	}
	frac := sec - float64(int64(sec))
	return strconv.Itoa(int(s/3600)/10) + strconv.Itoa(int(s/3600)%10) + ":" +
		two(int(s/60%60)) + ":" + two(int(s%60)) + strings.TrimPrefix(strconv.FormatFloat(frac, 'f', 1, 64), "0")
}

func two(v int) string { return strconv.Itoa(v/10) + strconv.Itoa(v%10) }
