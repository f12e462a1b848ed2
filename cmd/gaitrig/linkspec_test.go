package main

import (
	"io"
	"strings"
	"testing"
)

func TestParseLinkSpec(t *testing.T) {
	tests := []struct {
		in      string
		want    linkSpec
		wantErr string
	}{
		{in: "builtin", want: linkSpec{Kind: linkBuiltin}},
		{in: "embedded", want: linkSpec{Kind: linkEmbedded}},
		{in: "mqtt:embedded", want: linkSpec{Kind: linkEmbedded}},
		{in: "serial:/dev/ttyACM0", want: linkSpec{Kind: linkSerial, Port: "/dev/ttyACM0", Baud: 115200}},
		{in: "serial:/dev/ttyACM0@921600", want: linkSpec{Kind: linkSerial, Port: "/dev/ttyACM0", Baud: 921600}},
		{in: "mqtt:tcp://127.0.0.1:1883", want: linkSpec{Kind: linkMQTT, URL: "tcp://127.0.0.1:1883"}},
		{in: "serial:", wantErr: "no serial port"},
		{in: "serial:/dev/x@fast", wantErr: "baud rate"},
		{in: "mqtt:127.0.0.1", wantErr: "scheme"},
		{in: "usb", wantErr: "unknown link"},
	}
	for _, tt := range tests {
		got, err := parseLinkSpec(tt.in)
		if tt.wantErr != "" {
			if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
				t.Errorf("parseLinkSpec(%q) error = %v, want it to mention %q", tt.in, err, tt.wantErr)
			}
			if exitCodeFor(err) != exitConfig {
				t.Errorf("parseLinkSpec(%q): exit code %d, want %d", tt.in, exitCodeFor(err), exitConfig)
			}
			continue
		}
		if err != nil || got != tt.want {
			t.Errorf("parseLinkSpec(%q) = %+v, %v; want %+v", tt.in, got, err, tt.want)
		}
	}
}

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
