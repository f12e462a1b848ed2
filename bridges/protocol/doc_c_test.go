package protocol

import (
	"encoding/hex"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

var cBlock = regexp.MustCompile("(?s)```c\n(.*?)```")

// TestDocCSnippets compiles the C99 code printed in docs/protocol.md (the
// bitwise CRC and the COBS decoder) with gcc and checks it against this
// package on random inputs, so the document's C is known to work.
func TestDocCSnippets(t *testing.T) {
	gcc, err := exec.LookPath("gcc")
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatal("gcc is required (GAITRIG_REQUIRE_TOOLS=1) but not found")
		}
		t.Skip("gcc not found; the document's C snippets are not compiled")
	}
	raw, err := os.ReadFile(docPath)
	if err != nil {
		t.Fatal(err)
	}
	blocks := cBlock.FindAllStringSubmatch(string(raw), -1)
	if len(blocks) != 2 {
		t.Fatalf("expected 2 C blocks (CRC, COBS decode) in the document, found %d", len(blocks))
	}
	src := "#include <stdint.h>\n#include <stddef.h>\n#include <stdio.h>\n#include <string.h>\n" +
		blocks[0][1] + blocks[1][1] + `
static int unhex(const char *s, uint8_t *out) {
    int n = 0; unsigned v;
    while (sscanf(s, "%2x", &v) == 1) { out[n++] = (uint8_t)v; s += 2; }
    return n;
}
int main(void) {
    static char line[4096]; static uint8_t in[2048], out[2048];
    while (fgets(line, sizeof line, stdin)) {
        line[strcspn(line, "\n")] = 0;
        char kind = line[0];
        int n = unhex(line + 2, in);
        if (kind == 'C') printf("%04X\n", crc16_ccitt_false(in, (size_t)n));
        else {
            int k = cobs_decode(in, n, out, (int)sizeof out);
            if (k < 0) { printf("ERR\n"); continue; }
            for (int i = 0; i < k; i++) printf("%02x", out[i]);
            printf("\n");
        }
    }
    return 0;
}
`
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "doc.c"), []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	bin := filepath.Join(dir, "doc")
	if out, err := exec.Command(gcc, "-std=c99", "-Wall", "-Wextra", "-Werror", "-O1", "-o", bin, filepath.Join(dir, "doc.c")).CombinedOutput(); err != nil {
		t.Fatalf("gcc: %v\n%s", err, out)
	}
	rng := rand.New(rand.NewPCG(9, 10))
	var input strings.Builder
	var want []string
	for i := range 200 {
		p := make([]byte, rng.IntN(700))
		for j := range p {
			if rng.IntN(8) != 0 {
				p[j] = byte(rng.Uint32())
			}
		}
		if i%2 == 0 {
			input.WriteString("C " + hex.EncodeToString(p) + "\n")
			want = append(want, strings.ToUpper(hex.EncodeToString([]byte{byte(CRC16(p) >> 8), byte(CRC16(p))})))
			continue
		}
		enc := make([]byte, COBSMaxLen(len(p)))
		n, _ := EncodeCOBS(enc, p)
		w := enc[:n]
		if i%6 == 1 && n > 2 { // damage some: the C decoder must refuse what Go refuses
			w[rng.IntN(n)] = 0
		}
		input.WriteString("D " + hex.EncodeToString(w) + "\n")
		dec := make([]byte, len(w))
		k, err := DecodeCOBS(dec, w)
		if err != nil {
			want = append(want, "ERR")
		} else {
			want = append(want, hex.EncodeToString(dec[:k]))
		}
	}
	input.WriteString("C " + hex.EncodeToString([]byte("123456789")) + "\n")
	want = append(want, "29B1")
	cmd := exec.Command(bin)
	cmd.Stdin = strings.NewReader(input.String())
	out, err := cmd.Output()
	if err != nil {
		t.Fatal(err)
	}
	got := strings.Split(strings.TrimRight(string(out), "\n"), "\n")
	if len(got) != len(want) {
		t.Fatalf("C program printed %d lines, want %d", len(got), len(want))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("case %d: C says %.40s…, Go says %.40s…", i, got[i], want[i])
		}
	}
}
