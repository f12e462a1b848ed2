// Package nonfinite is the one spelling, in gaitrig's files and messages,
// of the numbers JSON has no form for: NaN, +Inf and -Inf are written as
// the JSON strings "NaN", "+Inf" and "-Inf" (the spelling of the event
// log's encoder, zerolog), so a faulty firmware's NaN torque or a run's
// infinite minimum survives into the record and reads back as the same
// number. Output that reports figures to people instead (the --json of the
// command line) writes null for a figure that was not measured: that is
// rig.JSONSafe's policy, not this package's.
package nonfinite

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
)

// Word is the word for a non-finite f ("NaN", "+Inf", "-Inf"), or "" when
// f is finite.
func Word(f float64) string {
	switch {
	case math.IsNaN(f):
		return "NaN"
	case math.IsInf(f, 1):
		return "+Inf"
	case math.IsInf(f, -1):
		return "-Inf"
	}
	return ""
}

// AppendJSON appends f as a JSON value: a number in the shortest form that
// reads back to the same bits at bitSize (32 or 64), or its word as a JSON
// string. It allocates nothing beyond growing dst.
func AppendJSON(dst []byte, f float64, bitSize int) []byte {
	if w := Word(f); w != "" {
		dst = append(dst, '"')
		dst = append(dst, w...)
		return append(dst, '"')
	}
	return strconv.AppendFloat(dst, f, 'g', -1, bitSize)
}

// ParseJSON reads a JSON value written by AppendJSON (or by zerolog): a
// number, one of the strings "NaN", "+Inf" ("Inf" too) and "-Inf", or null,
// which reads as NaN. bitSize (32 or 64) is the precision of a number.
func ParseJSON(raw []byte, bitSize int) (float64, error) {
	raw = bytes.TrimSpace(raw)
	switch string(raw) {
	case "null":
		return math.NaN(), nil
	case `"NaN"`:
		return math.NaN(), nil
	case `"+Inf"`, `"Inf"`:
		return math.Inf(1), nil
	case `"-Inf"`:
		return math.Inf(-1), nil
	}
	if len(raw) > 0 && raw[0] == '"' {
		var s string
		if err := json.Unmarshal(raw, &s); err != nil {
			return 0, err
		}
		return 0, fmt.Errorf("not a number: %q", s)
	}
	return strconv.ParseFloat(string(raw), bitSize)
}
