package protocol

import (
	"encoding/hex"
	"math/rand/v2"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
)

// TestCRC16AgainstPython compares CRC16 with Python's binascii.crc_hqx, a
// CRC-CCITT (polynomial 0x1021, no reflection) whose start value we set to
// 0xFFFF, which makes it CRC-16/CCITT-FALSE. Python 3 is Debian's python3.
func TestCRC16AgainstPython(t *testing.T) {
	py, err := exec.LookPath("python3")
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatal("python3 is required (GAITRIG_REQUIRE_TOOLS=1) but not found")
		}
		t.Skip("python3 not found; the CRC is still checked against its catalogue check value")
	}
	rng := rand.New(rand.NewPCG(7, 8))
	var in strings.Builder
	var want []uint16
	for range 64 {
		p := make([]byte, rng.IntN(400))
		for i := range p {
			p[i] = byte(rng.Uint32())
		}
		in.WriteString(hex.EncodeToString(p) + "\n")
		want = append(want, CRC16(p))
	}
	cmd := exec.Command(py, "-c", `import sys, binascii
for line in sys.stdin:
    print(binascii.crc_hqx(bytes.fromhex(line.strip()), 0xFFFF))`)
	cmd.Stdin = strings.NewReader(in.String())
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("python3: %v", err)
	}
	lines := strings.Fields(string(out))
	if len(lines) != len(want) {
		t.Fatalf("python3 printed %d values, want %d", len(lines), len(want))
	}
	for i, l := range lines {
		v, err := strconv.ParseUint(l, 10, 16)
		if err != nil || uint16(v) != want[i] {
			t.Errorf("case %d: python 0x%04X, ours 0x%04X", i, v, want[i])
		}
	}
}
