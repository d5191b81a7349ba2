package report

import (
	"math"
	"strconv"
	"strings"
)

// Engineering units and sensible precision for what people read (issue
// 18 item 8: "1.6e+11 Hz/s", "1575.420000 MHz", "-0.0 dB"); the CSV and
// the event log keep full precision.

// SI scales a value into an SI prefix (k, M, G, T; none below 1000) with
// three significant digits: SI(1.6e11, "Hz/s") is "160 GHz/s".
func SI(v float64, unit string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	prefixes := []string{"", "k", "M", "G", "T", "P"}
	i, a := 0, math.Abs(v)
	for a >= 999.5 && i < len(prefixes)-1 {
		a /= 1000
		v /= 1000
		i++
	}
	s := strconv.FormatFloat(v, 'g', 3, 64)
	if strings.ContainsAny(s, "e") { // below 0.001: plain notation
		s = strconv.FormatFloat(v, 'f', -1, 64)
	}
	return s + " " + prefixes[i] + unit
}

// MHz is a frequency in MHz to the hertz, without trailing zeros:
// MHz(1575.42e6) is "1575.42 MHz".
func MHz(hz float64) string { return Trim(hz/1e6, 6) + " MHz" }

// Trim formats v with at most prec decimals and no trailing zeros, and
// never as "-0".
func Trim(v float64, prec int) string {
	s := strconv.FormatFloat(v, 'f', prec, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}

// noNegZero turns a formatted "-0.0" (any number of zeros) into "0.0".
func noNegZero(s string) string {
	if strings.HasPrefix(s, "-") && strings.Trim(s[1:], "0.") == "" {
		return s[1:]
	}
	if strings.HasPrefix(s, "+") && strings.Trim(s[1:], "0.") == "" {
		return s[1:]
	}
	return s
}
