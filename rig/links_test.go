package rig

import (
	"errors"
	"strings"
	"testing"
)

func TestParseLink(t *testing.T) {
	tests := []struct {
		in      string
		want    Link
		wantErr string
	}{
		{in: "builtin", want: Link{Kind: "builtin"}},
		{in: "embedded", want: Link{Kind: "embedded"}},
		{in: "mqtt:embedded", want: Link{Kind: "embedded"}},
		{in: "pty", want: Link{Kind: "pty"}},
		{in: "serial:/dev/ttyACM0", want: Link{Kind: "serial", Addr: "/dev/ttyACM0", Baud: 115200}},
		{in: "serial:/dev/ttyACM0@921600", want: Link{Kind: "serial", Addr: "/dev/ttyACM0", Baud: 921600}},
		{in: "mqtt:tcp://127.0.0.1:1883", want: Link{Kind: "mqtt", Addr: "tcp://127.0.0.1:1883"}},
		{in: "serial:", wantErr: "no serial port"},
		{in: "serial:/dev/x@fast", wantErr: "baud rate"},
		{in: "serial:/dev/x@-3", wantErr: "baud rate"},
		{in: "mqtt:127.0.0.1", wantErr: "scheme"},
		{in: "usb", wantErr: "unknown link; allowed: builtin, embedded, pty, serial:PORT[@BAUD], mqtt:URL"},
		{in: "", wantErr: "unknown link"},
	}
	for _, tt := range tests {
		got, err := ParseLink(tt.in)
		if tt.wantErr != "" {
			if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
				t.Errorf("ParseLink(%q) error = %v, want it to mention %q", tt.in, err, tt.wantErr)
			}
			if !errors.Is(err, ErrConfig) {
				t.Errorf("ParseLink(%q): %v is not a configuration error", tt.in, err)
			}
			continue
		}
		if err != nil || got != tt.want {
			t.Errorf("ParseLink(%q) = %+v, %v; want %+v", tt.in, got, err, tt.want)
		}
		// What String writes, ParseLink reads back to the same link.
		if again, err := ParseLink(got.String()); err != nil || again != got {
			t.Errorf("ParseLink(%q).String() = %q reads back as %+v, %v", tt.in, got.String(), again, err)
		}
	}
}

// Only the builtin kind runs its peer in this process without a wire.
func TestInProcessKinds(t *testing.T) {
	for _, k := range LinkKinds() {
		if got, want := (Link{Kind: k.Name}).InProcess(), k.Name == "builtin"; got != want {
			t.Errorf("%s: InProcess %v, want %v", k.Name, got, want)
		}
		if !strings.Contains(LinkHelp(), k.Syntax) {
			t.Errorf("the --link help does not mention %s", k.Syntax)
		}
	}
	if (Link{Kind: "nonesuch"}).InProcess() {
		t.Error("an unknown kind is in process")
	}
}

func TestRegisterLinkKindRefusesDuplicates(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("a second builtin kind was registered")
		}
	}()
	RegisterLinkKind(LinkKind{Name: "builtin", Parse: parseSerial, Dial: dialSerial})
}
