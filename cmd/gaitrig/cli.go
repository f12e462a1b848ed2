package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"sort"
	"strings"

	"gaitrig/rig"
)

// cmdline is one command's flags and output streams, with the behaviour
// every command shares, so that all of them answer alike:
//
//   - --help (or -h) prints the usage line, the description and the flags,
//     spelled --name as the documentation writes them, to stdout with exit
//     code 0, so `gaitrig run --help | less` shows it;
//   - a usage error prints one line, "gaitrig NAME: what is wrong", to
//     stderr first, then a pointer to --help (not the whole help), and exits
//     with code 2;
//   - --json (when the command has results to print) writes the result as
//     one JSON document on stdout, without HTML escaping and with NaN and
//     ±Inf as null; the progress lines then go to stderr;
//   - an old flag spelling still works and says, on stderr, what replaced it.
//
// It embeds the standard library's flag.FlagSet, so flags are declared as
// ever (c.String, c.Bool, c.IntVar, …).
type cmdline struct {
	*flag.FlagSet
	name, argsUsage, description string
	stdout, stderr               io.Writer

	asJSON     *bool
	deprecated map[string]string // old flag name → the note printed when it is used
	defaults   map[string]string // flag name → its default in words, for a machine-dependent default
}

// newCmdline starts the flags of the command name. argsUsage names its
// positional arguments ("SCENARIO", "RUNDIR", "" for none); description is
// the help text, in sentences.
func newCmdline(name, argsUsage, description string, stdout, stderr io.Writer) *cmdline {
	fs := flag.NewFlagSet("gaitrig "+name, flag.ContinueOnError)
	// The flag package prints its errors and the help itself, to one writer
	// and with single dashes; parse prints both instead, each to its stream.
	fs.SetOutput(io.Discard)
	fs.Usage = func() {}
	return &cmdline{FlagSet: fs, name: name, argsUsage: argsUsage, description: strings.TrimSpace(description),
		stdout: stdout, stderr: stderr, deprecated: map[string]string{}, defaults: map[string]string{}}
}

// defaultIs makes the help say the default of flag name in words, for a
// default that depends on the machine or the environment (the number of
// cores, an environment variable), so the help and docs/cli.md read the
// same everywhere.
func (c *cmdline) defaultIs(name, words string) { c.defaults[name] = words }

// jsonFlag declares --json. A command that declares it registers its
// result type in jsonResults (see docs.go), so docs/cli.md documents it.
func (c *cmdline) jsonFlag() *bool {
	c.asJSON = c.Bool("json", false, "print the result as one JSON document on stdout (schema in docs/cli.md); progress lines go to stderr")
	return c.asJSON
}

// jsonMode reports whether --json was given.
func (c *cmdline) jsonMode() bool { return c.asJSON != nil && *c.asJSON }

// progress is where lines a person watches while the command works go:
// stdout, or stderr under --json so stdout holds only the document.
func (c *cmdline) progress() io.Writer {
	if c.jsonMode() {
		return c.stderr
	}
	return c.stdout
}

// deprecate marks an already declared flag as an old spelling: it keeps
// working (a nightly script may use it), is left out of the help, and
// prints note on stderr when given.
func (c *cmdline) deprecate(old, note string) { c.deprecated[old] = note }

// parse parses args, flags and arguments in any order (gaitrig run
// SCENARIO --out DIR works as well as gaitrig run --out DIR SCENARIO); a
// lone "--" ends the flags. It returns (done, code): done is true when the
// command must return code right away (after --help, or a usage error it
// has printed).
func (c *cmdline) parse(args []string) (bool, int) {
	var positional []string
	for {
		if err := c.FlagSet.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				c.printHelp(c.stdout)
				return true, exitPass
			}
			return true, c.usageError("%s", doubleDash(err.Error()))
		}
		rest := c.Args()
		if len(rest) == 0 {
			break
		}
		if len(args) > len(rest) && args[len(args)-len(rest)-1] == "--" {
			positional = append(positional, rest...)
			break
		}
		positional = append(positional, rest[0])
		args = rest[1:]
	}
	_ = c.FlagSet.Parse(append([]string{"--"}, positional...))
	c.Visit(func(f *flag.Flag) {
		if note, ok := c.deprecated[f.Name]; ok {
			fmt.Fprintf(c.stderr, "gaitrig %s: --%s is deprecated: %s\n", c.name, f.Name, note)
		}
	})
	return false, 0
}

// usageError prints a usage error (one line, then where to find the help)
// and returns exit code 2.
func (c *cmdline) usageError(format string, a ...any) int {
	fmt.Fprintf(c.stderr, "gaitrig %s: %s\n", c.name, fmt.Sprintf(format, a...))
	fmt.Fprintf(c.stderr, "Run 'gaitrig %s --help' for its flags and arguments.\n", c.name)
	return exitConfig
}

// fail prints err as the command's error and returns its exit code: 2 for
// the user's configuration (rig.ErrConfig), 1 otherwise.
func (c *cmdline) fail(err error) int {
	fmt.Fprintf(c.stderr, "gaitrig %s: %v\n", c.name, err)
	return exitCodeFor(err)
}

// warn prints a warning that does not stop the command.
func (c *cmdline) warn(format string, a ...any) {
	fmt.Fprintf(c.stderr, "gaitrig %s: warning: %s\n", c.name, fmt.Sprintf(format, a...))
}

// printJSON writes v as the command's JSON document on stdout and returns
// code, or exit code 1 when it cannot be written.
func (c *cmdline) printJSON(v any, code int) int {
	if err := writeJSON(c.stdout, v); err != nil {
		return c.fail(err)
	}
	return code
}

// writeJSON is the one JSON encoding of what commands print: indented, no
// HTML escaping (a ">" in a sentence stays ">"), NaN and ±Inf as null
// (rig.JSONSafe).
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", "  ")
	return enc.Encode(rig.JSONSafe(v))
}

// printHelp writes the usage line, the description and the flags.
func (c *cmdline) printHelp(w io.Writer) {
	usage := "gaitrig " + c.name
	if c.hasFlags() {
		usage += " [flags]"
	}
	if c.argsUsage != "" {
		usage += " " + c.argsUsage
	}
	fmt.Fprintf(w, "Usage: %s\n", usage)
	if c.description != "" {
		fmt.Fprintf(w, "\n%s\n", c.description)
	}
	if c.hasFlags() {
		fmt.Fprintln(w, "\nFlags:")
		c.printFlags(w)
	}
}

func (c *cmdline) hasFlags() bool {
	n := 0
	c.VisitAll(func(f *flag.Flag) {
		if _, old := c.deprecated[f.Name]; !old {
			n++
		}
	})
	return n > 0
}

// printFlags lists the flags in alphabetical order as --name VALUE with
// their help indented below and the default, when it is not the zero
// value, after it. Old spellings are listed last, with what replaced them.
func (c *cmdline) printFlags(w io.Writer) {
	var old []string
	c.VisitAll(func(f *flag.Flag) {
		if _, ok := c.deprecated[f.Name]; ok {
			old = append(old, f.Name)
			return
		}
		value, help := flag.UnquoteUsage(f)
		line := "  --" + f.Name
		if value != "" {
			line += " " + strings.ToUpper(value)
		}
		fmt.Fprintln(w, line)
		for _, l := range strings.Split(help, "\n") {
			fmt.Fprintf(w, "        %s\n", l)
		}
		if words, ok := c.defaults[f.Name]; ok {
			fmt.Fprintf(w, "        (default: %s)\n", words)
		} else if !isZeroDefault(f.DefValue) {
			fmt.Fprintf(w, "        (default %s)\n", quoteDefault(f))
		}
	})
	if len(old) > 0 {
		sort.Strings(old)
		fmt.Fprintln(w, "\nOld spellings, still accepted:")
		for _, n := range old {
			fmt.Fprintf(w, "  --%s: %s\n", n, c.deprecated[n])
		}
	}
}

// isZeroDefault reports whether a flag's default is its type's zero value,
// which the help leaves unsaid.
func isZeroDefault(def string) bool {
	switch def {
	case "", "0", "false", "0s":
		return true
	}
	return false
}

// quoteDefault quotes a string flag's default, as the flag package does.
func quoteDefault(f *flag.Flag) string {
	if fmt.Sprintf("%T", f.Value) == "*flag.stringValue" {
		return fmt.Sprintf("%q", f.DefValue)
	}
	return f.DefValue
}

// doubleDash rewrites the flag package's messages ("flag provided but not
// defined: -lnk") to the spelling the documentation uses ("--lnk").
func doubleDash(msg string) string {
	for _, p := range []string{"defined: -", "argument: -", "for flag -", "for -"} {
		if i := strings.Index(msg, p); i >= 0 && !strings.HasPrefix(msg[i+len(p):], "-") {
			return msg[:i+len(p)-1] + "-" + msg[i+len(p)-1:]
		}
	}
	return msg
}
