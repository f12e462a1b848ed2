package protocol

import (
	"fmt"
	"os"
	"strings"
	"testing"
	"time"
)

// TestSerialBudgetByHand compares the budget with a hand computation: a
// state frame is 94 bytes, COBS adds one code byte (no run of 254 non-zero
// bytes in a frame that short), the delimiter one more: 96 bytes; a command
// 46 + 1 + 1 = 48. 144 bytes at 10 bits per byte (8N1: start, 8 data, stop;
// common practice) are 1440 bits per tick.
func TestSerialBudgetByHand(t *testing.T) {
	if s, c := WireLen(TypeState), WireLen(TypeCommand); s != 96 || c != 48 {
		t.Fatalf("wire lengths: state %d, command %d; by hand 96 and 48", s, c)
	}
	cases := []struct {
		baud    int
		hz      float64
		compute time.Duration
		wire    time.Duration // 1440 bits / baud, by hand
		fits    bool
		maxHz   int // floor(1 / (wire + compute)), by hand
	}{
		{9600, 1, 0, 150 * time.Millisecond, true, 6},                               // 1440/9600 = 0.15 s
		{115200, 1000, 0, 12500 * time.Microsecond, false, 80},                      // 1440/115200 = 12.5 ms
		{115200, 80, 0, 12500 * time.Microsecond, true, 80},                         // exactly one period
		{115200, 81, 0, 12500 * time.Microsecond, false, 80},                        // 12.35 ms period
		{921600, 1000, 0, 1562500 * time.Nanosecond, false, 640},                    // 1.5625 ms
		{921600, 500, 200 * time.Microsecond, 1562500 * time.Nanosecond, true, 567}, // 1.7625 ms → 567.4 Hz
		{2000000, 1000, 0, 720 * time.Microsecond, true, 1388},                      // 0.72 ms → 1388.9 Hz
		{2000000, 1000, 300 * time.Microsecond, 720 * time.Microsecond, false, 980}, // 1.02 ms → 980.4 Hz
	}
	for _, c := range cases {
		b := SerialBudget(c.baud, c.hz, c.compute)
		if b.Wire != c.wire || b.Total != c.wire+c.compute {
			t.Errorf("%d baud: wire %v total %v, by hand %v and %v", c.baud, b.Wire, b.Total, c.wire, c.wire+c.compute)
		}
		if b.Fits() != c.fits {
			t.Errorf("%d baud at %g Hz (+%v): fits %v, by hand %v", c.baud, c.hz, c.compute, b.Fits(), c.fits)
		}
		if got := MaxTickHz(c.baud, c.compute); got != c.maxHz {
			t.Errorf("%d baud (+%v): highest tick rate %d Hz, by hand %d", c.baud, c.compute, got, c.maxHz)
		}
	}
	if b, ok := LowestBaud(1000, 0); !ok || b != 2000000 {
		t.Errorf("lowest standard baud for 1 kHz: %d %v; by hand 2 000 000 (1 000 000 carries 694 Hz)", b, ok)
	}
	if b, ok := LowestBaud(100, 0); !ok || b != 230400 {
		t.Errorf("lowest standard baud for 100 Hz: %d %v; by hand 230 400 (115 200 carries 80 Hz)", b, ok)
	}
	if _, ok := LowestBaud(5000, 0); ok {
		t.Error("5 kHz fits no standard rate (4 Mbaud carries 2777 Hz), but LowestBaud found one")
	}
	if MaxTickHz(0, 0) != 0 || UARTTime(10, 0) != 0 {
		t.Error("a baud rate of 0 must give 0, not a division by zero")
	}
}

// wireBudgetTable is the table of docs/protocol.md section 13, generated
// from MaxTickHz.
func wireBudgetTable() string {
	var b strings.Builder
	b.WriteString("| baud rate | state + command on the wire | highest tick rate |\n| ---: | ---: | ---: |\n")
	for _, r := range StandardBauds {
		w := SerialBudget(r, 0, 0).Wire
		fmt.Fprintf(&b, "| %d | %.3f ms | %d Hz |\n", r, float64(w)/float64(time.Millisecond), MaxTickHz(r, 0))
	}
	return b.String()
}

// TestWireBudgetTableCurrent fails when the table in docs/protocol.md is not
// what MaxTickHz gives (go test -run WireBudgetTable -update rewrites it).
func TestWireBudgetTableCurrent(t *testing.T) {
	raw, err := os.ReadFile(docPath)
	if err != nil {
		t.Fatal(err)
	}
	doc := string(raw)
	const begin, end = "<!-- wire budget begin -->\n", "<!-- wire budget end -->"
	pre, got, post, ok := between(doc, begin, end)
	if !ok {
		t.Fatalf("%s lacks the markers %q … %q", docPath, begin, end)
	}
	want := wireBudgetTable()
	if *update {
		if err := os.WriteFile(docPath, []byte(pre+want+post), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	if got != want {
		t.Errorf("the wire-time table in %s is stale (run go test ./bridges/protocol -run WireBudgetTable -update):\ngot:\n%s\nwant:\n%s", docPath, got, want)
	}
}
