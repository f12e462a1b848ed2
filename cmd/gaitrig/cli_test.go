package main

import (
	"io"
	"strings"
	"testing"
)

func TestShardSplitsEveryItemOnce(t *testing.T) {
	for n := 1; n <= 4; n++ {
		seen := make([]int, 11)
		for k := 1; k <= n; k++ {
			s, err := parseShard(strings.Join([]string{itoa(k), itoa(n)}, "/"))
			if err != nil {
				t.Fatal(err)
			}
			for i := range seen {
				if s.pick(i) {
					seen[i]++
				}
			}
		}
		for i, c := range seen {
			if c != 1 {
				t.Errorf("N=%d: item %d picked %d times, want exactly once", n, i, c)
			}
		}
	}
	for _, bad := range []string{"0/2", "3/2", "a/b", "2"} {
		if _, err := parseShard(bad); err == nil {
			t.Errorf("parseShard(%q) accepted a bad shard", bad)
		}
	}
}

func itoa(i int) string { return string(rune('0' + i)) }

func TestFlagsAndArgumentsInAnyOrder(t *testing.T) {
	tests := []struct {
		args []string
		out  string
		pos  []string
	}{
		{[]string{"--out", "x", "a"}, "x", []string{"a"}},
		{[]string{"a", "--out", "x"}, "x", []string{"a"}},
		{[]string{"a", "--out", "x", "b"}, "x", []string{"a", "b"}},
		{[]string{"--", "--out"}, "", []string{"--out"}},
	}
	for _, tt := range tests {
		fs := newFlagSet("t", "", "", io.Discard)
		out := fs.String("out", "", "")
		if done, _ := parseFlags(fs, tt.args); done {
			t.Fatalf("%v: parse stopped", tt.args)
		}
		if *out != tt.out || strings.Join(fs.Args(), ",") != strings.Join(tt.pos, ",") {
			t.Errorf("%v: out=%q args=%v, want out=%q args=%v", tt.args, *out, fs.Args(), tt.out, tt.pos)
		}
	}
}
