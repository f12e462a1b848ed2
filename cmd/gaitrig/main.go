// Command gaitrig is the hardware-in-the-loop harness for biped
// walking-controller firmware: it runs the walker plant against firmware over
// a serial line, MQTT or in-process, records every tick, raises alarms on
// slip, lift-off, falls and link faults, and writes a run folder with a
// report.
//
// Exit codes: 0 pass, 1 a criterion failed or the run tripped (or a
// regression in a suite, NO-GO in preflight), 2 bad usage or configuration,
// 3 the run is invalid (the host stalled it: run it again), 130 a second
// interrupt ended the process.
//
// Every sub-command prints its own help with --help.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"strings"
	"syscall"
	"unicode/utf8"

	"gaitrig/record"
	"gaitrig/rig"
)

// Exit codes of every sub-command.
const (
	exitPass   = 0 // every criterion passed
	exitFail   = 1 // a criterion failed, the run tripped, a regression, NO-GO
	exitConfig = 2 // bad usage, bad scenario, link could not be opened
	// exitInvalid: the host, not the firmware, spoiled the run (outcome
	// invalid, alarm host_stall), or in a batch nothing regressed but the
	// host spoiled some scenario on every attempt (outcome invalid, a link
	// that could not be opened), or the conformance battery or `latency
	// --link` could not judge a state on a contended host (host_stall):
	// run it again, the build is not to blame.
	exitInvalid = 3
	// exitKilled: a second SIGINT or SIGTERM ended the process at once
	// (128 + SIGINT, as a shell reports a process an interrupt ended).
	exitKilled = 130
)

// interruptContext is cancelled by the first SIGINT or SIGTERM, so the run
// ends at its next tick (or at once while it waits for the greeting) with
// outcome aborted and a complete run folder. Some waits cannot be cut
// short (a broker that accepts the connection and never answers); a
// second signal therefore ends the process at once, as an operator who
// presses Ctrl-C twice expects.
func interruptContext(stderr io.Writer) (context.Context, func()) {
	ctx, cancel := context.WithCancelCause(context.Background())
	sig := make(chan os.Signal, 2)
	signal.Notify(sig, os.Interrupt, syscall.SIGTERM)
	done := make(chan struct{})
	go func() {
		select {
		case s := <-sig:
			fmt.Fprintf(stderr, "gaitrig: %v: ending the run; interrupt again to end the process now\n", s)
			cancel(fmt.Errorf("%v", s))
		case <-done:
			return
		}
		select {
		case s := <-sig:
			fmt.Fprintf(stderr, "gaitrig: second %v: ending the process now; the run folder may be incomplete\n", s)
			os.Exit(exitKilled)
		case <-done:
		}
	}()
	return ctx, func() {
		signal.Stop(sig)
		close(done)
		cancel(context.Canceled)
	}
}

// command is one sub-command: its one-line summary and its entry point.
type command struct {
	summary string
	run     func(args []string, stdout, stderr io.Writer) int
}

// commands is filled by the init functions of the sub-command files.
var commands = map[string]command{}

// badUsage formats an error that comes from the command line or the
// configuration (rig.ErrConfig), which exits with code 2.
func badUsage(format string, a ...any) error { return rig.Configf(format, a...) }

// exitCodeFor maps an error to the exit code the command line promises.
func exitCodeFor(err error) int {
	switch {
	case err == nil:
		return exitPass
	case errors.Is(err, rig.ErrConfig):
		return exitConfig
	}
	return exitFail
}

func main() {
	os.Exit(dispatch(os.Args[1:], os.Stdout, os.Stderr))
}

// dispatch picks the sub-command named by args[0] and runs it.
func dispatch(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		// No command is a usage error: the overview goes where errors go.
		printUsage(stderr)
		return exitConfig
	}
	if args[0] == "help" && len(args) == 2 {
		// gaitrig help run is gaitrig run --help.
		args = []string{args[1], "--help"}
	}
	if args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		printUsage(stdout)
		return exitPass
	}
	if args[0] == "version" || args[0] == "--version" {
		fmt.Fprintln(stdout, "gaitrig", toolVersion())
		return exitPass
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "gaitrig: unknown command %q\nRun 'gaitrig --help' for the list of commands.\n", args[0])
		return exitConfig
	}
	return c.run(args[1:], stdout, stderr)
}

func printUsage(w io.Writer) {
	fmt.Fprintln(w, "gaitrig: hardware-in-the-loop harness for biped walking-controller firmware")
	fmt.Fprintln(w, "\nUsage: gaitrig COMMAND [flags] [arguments]   (gaitrig COMMAND --help, or docs/cli.md, for details)")
	fmt.Fprintln(w, "\nCommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	width := 0
	for _, n := range names {
		width = max(width, len(n))
	}
	for _, n := range names {
		fmt.Fprintf(w, "  %-*s  %s\n", width, n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nExit codes: 0 pass, 1 a criterion failed or the run tripped, 2 bad usage or configuration,")
	fmt.Fprintln(w, "3 invalid: the host stalled the run (not the firmware's fault; run it again).")
	fmt.Fprintln(w, "\n"+safetyCaution)
}

// newFlagSet and parseFlags are the flag helpers commands used before
// cmdline (cli.go); they are kept only so a command written against them
// still builds. They print the help to the wrong stream and with single
// dashes, and TestEveryCommandAnswersAlike fails for a command that uses
// them: migrate with newCmdline and (*cmdline).parse (DEVELOPERS.md, "Add
// a command").
//
// Deprecated: use newCmdline.
func newFlagSet(name, argsUsage, description string, stderr io.Writer) *flag.FlagSet {
	c := newCmdline(name, argsUsage, description, stderr, stderr)
	c.SetOutput(stderr)
	c.Usage = func() { c.printHelp(stderr) }
	return c.FlagSet
}

// parseFlags parses args into fs as (*cmdline).parse does.
//
// Deprecated: use (*cmdline).parse.
func parseFlags(fs *flag.FlagSet, args []string) (bool, int) {
	c := &cmdline{FlagSet: fs, name: strings.TrimPrefix(fs.Name(), "gaitrig "), stdout: fs.Output(), stderr: fs.Output(), deprecated: map[string]string{}, defaults: map[string]string{}}
	return c.parse(args)
}

// safetyCaution is printed by every command that reports a result: the
// one caution text (record.Caution, also at the top of every report),
// wrapped for a terminal.
var safetyCaution = wrapWords("Caution: "+record.Caution, 90)

// wrapWords breaks text into lines of at most width characters at spaces.
func wrapWords(text string, width int) string {
	var b strings.Builder
	n := 0
	for i, w := range strings.Fields(text) {
		l := utf8.RuneCountInString(w)
		if i > 0 {
			if n+1+l > width {
				b.WriteByte('\n')
				n = 0
			} else {
				b.WriteByte(' ')
				n++
			}
		}
		b.WriteString(w)
		n += l
	}
	return b.String()
}
