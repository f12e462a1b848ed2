package rig

import (
	"context"
	"errors"
	"slices"
	"strings"
	"testing"
	"time"

	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/internal/retrytest"
	"gaitrig/record"
	"gaitrig/scenarios"
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
		{in: "pty@921600", want: Link{Kind: "pty", Baud: 921600}},
		{in: "pty@", wantErr: "baud rate"},
		{in: "pty@0", wantErr: "baud rate"},
		{in: "serial:/dev/ttyACM0", want: Link{Kind: "serial", Addr: "/dev/ttyACM0", Baud: 115200}},
		{in: "serial:/dev/ttyACM0@921600", want: Link{Kind: "serial", Addr: "/dev/ttyACM0", Baud: 921600}},
		{in: "mqtt:tcp://127.0.0.1:1883", want: Link{Kind: "mqtt", Addr: "tcp://127.0.0.1:1883"}},
		{in: "serial:", wantErr: "no serial port"},
		{in: "serial:/dev/x@fast", wantErr: "baud rate"},
		{in: "serial:/dev/x@-3", wantErr: "baud rate"},
		{in: "mqtt:127.0.0.1", wantErr: "scheme"},
		{in: "usb", wantErr: "unknown link; allowed: builtin, embedded, pty[@BAUD], serial:PORT[@BAUD], mqtt:URL"},
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

// Every link kind that starts its own peer carries a short lockstep run of
// the demo to its end: the registry's Dial wires the built-in firmware to
// the other end of a real pty pair, of the embedded broker on loopback, or
// of the in-process link, and closes everything afterwards.
func TestLocalLinkKindsCarryARun(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	for _, link := range []string{"builtin", "pty", "embedded"} {
		t.Run(link, func(t *testing.T) {
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			// Each attempt dials the link afresh (a new pty and firmware).
			res := retrytest.UntilValid(t, "over "+link, func(int) (Result, record.Summary) {
				res, err := Run(ctx, sc, Options{Link: link, Clock: hil.Lockstep, MaxSteps: 3, NoRecord: true})
				if err != nil {
					t.Fatal(err)
				}
				return res, res.Summary
			})
			s := res.Summary
			if s.Steps != 3 || s.Outcome == record.Tripped || res.Loop.Link.Commands < uint64(s.Ticks) {
				t.Fatalf("over %s: %d steps, outcome %s (%s), %d commands for %d ticks", link, s.Steps, s.Outcome, s.Reason, res.Loop.Link.Commands, s.Ticks)
			}
		})
	}
}

// ServeFirmware serves the built-in firmware on a new pty as `gaitrig
// firmware --link pty` does, and a rig run over serial:PATH (the path the
// announcement names) walks against it; then the firmware ends, by the
// rig's stop or by its idle timeout (see the note at the end).
func TestServeFirmwareOverPty(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	type servedRun struct {
		res    Result
		path   string
		served chan error
	}
	// Each attempt serves a fresh firmware on a fresh pty; the firmware of
	// a run the host spoiled gets the rig's stop and ends by itself.
	r := retrytest.UntilValid(t, "over a served pty", func(int) (servedRun, record.Summary) {
		paths := make(chan string, 1)
		served := make(chan error, 1)
		go func() {
			served <- ServeFirmware("pty", "", "", "", reference.Options{Actuators: len(sc.JointNames()), IdleTimeout: 3 * time.Second}, func(line string) {
				_, path, _ := strings.Cut(line, "--link serial:")
				paths <- path
			})
		}()
		var path string
		select {
		case path = <-paths:
		case err := <-served:
			t.Fatalf("the firmware ended before it announced its pty: %v", err)
		case <-time.After(10 * time.Second):
			t.Fatal("no pty announced within 10 s")
		}
		res, err := Run(ctx, sc, Options{Link: "serial:" + path, Clock: hil.Lockstep, MaxSteps: 3, NoRecord: true})
		if err != nil {
			t.Fatal(err)
		}
		return servedRun{res: res, path: path, served: served}, res.Summary
	})
	res, path, served := r.res, r.path, r.served
	if res.Summary.Steps != 3 {
		t.Errorf("%d steps over serial:%s, want 3 (%s)", res.Summary.Steps, path, res.Summary.Reason)
	}
	select {
	case err := <-served:
		// serial.Conn.Close writes the rig's final stop before it closes
		// the port, for at most a bounded time (bridges/serial closeFlushWait):
		// a host that starves the writer past it loses the stop, and the
		// firmware then ends on its idle timeout instead. Either end is
		// accepted here; anything else is not.
		if err != nil && !strings.Contains(err.Error(), "nothing from the rig") {
			t.Errorf("the firmware ended with %v, want a normal end or its idle timeout", err)
		}
		t.Logf("the firmware ended with %v", err)
	case <-time.After(30 * time.Second):
		t.Error("the firmware did not end within 30 s of the run")
	}
	if err := ServeFirmware("embedded", "", "", "", reference.Options{}, func(string) {}); !errors.Is(err, ErrConfig) {
		t.Errorf("serving the firmware over the embedded kind: %v, want a configuration error", err)
	}
}

// A new link kind needs nothing but its registration: --link parses it,
// the help lists it, and a run dials it. The kind here is the in-process
// pair under another name, registered for this test only.
func TestRegisteredKindIsUsableEverywhere(t *testing.T) {
	RegisterLinkKind(LinkKind{
		Name: "loop", Syntax: "loop", Help: "test kind",
		Parse: exactly("loop"),
		Dial: func(d DialSetup) (Opened, error) {
			d.Lockstep = false // the goroutine firmware, as a link with a wire would have
			d.Link = Link{Kind: "builtin"}
			return dialBuiltin(d)
		},
	})
	t.Cleanup(func() {
		delete(linkKinds, "loop")
		linkOrder = slices.DeleteFunc(linkOrder, func(n string) bool { return n == "loop" })
	})
	if l, err := ParseLink("loop"); err != nil || l.Kind != "loop" {
		t.Fatalf("ParseLink(loop) = %+v, %v", l, err)
	}
	if !strings.Contains(LinkHelp(), `"loop": test kind`) {
		t.Errorf("help does not list the new kind:\n%s", LinkHelp())
	}
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	res, err := Run(ctx, sc, Options{Link: "loop", MaxSteps: 2, NoRecord: true})
	if err != nil || res.Summary.Steps != 2 {
		t.Fatalf("run over the new kind: %d steps, %v", res.Summary.Steps, err)
	}
}
