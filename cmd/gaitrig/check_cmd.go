package main

import (
	"errors"
	"fmt"
	"io"

	"gaitrig/rig"
	"gaitrig/scenarios"
)

func init() {
	commands["check"] = command{"validate scenario files without running them", cmdCheck}
	commands["scenarios"] = command{"list the built-in scenario library", cmdScenarios}
}

func cmdCheck(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("check", "SCENARIO...", `
Loads and validates each scenario (file or built-in name) as a run would:
the YAML schema, units and ranges, the plant parameters and the loop
configuration. Problems are printed as file:line: field: message. For a
serial link (the scenario's, or --link serial:PORT@BAUD or pty@BAUD) it also
computes the wire time of a state and a command at the baud rate and warns
when it is longer than a tick, naming the lowest standard baud rate and the
highest tick rate that fit (docs/protocol.md section 13); a wall-clock
scenario a run would refuse counts as a problem unless --force. Exit code 0
when all are valid, 2 otherwise.`, stderr)
	link := fs.String("link", "", "check against this link instead of the scenario's (see gaitrig run --help)")
	force := fs.Bool("force", false, "a wire-time overrun of a wall-clock scenario is only a warning, as with run --force")
	if done, code := parseFlags(fs, args); done {
		return code
	}
	if fs.NArg() == 0 {
		fmt.Fprintln(stderr, "gaitrig check: want at least one SCENARIO")
		fs.Usage()
		return exitConfig
	}
	bad := 0
	for _, arg := range fs.Args() {
		if err := checkOne(arg); err != nil {
			bad++
			var se *scenarios.Error
			if errors.As(err, &se) {
				for _, p := range se.Problems {
					fmt.Fprintln(stderr, p.String())
				}
			} else {
				fmt.Fprintf(stderr, "%s: %v\n", arg, err)
			}
			continue
		}
		if msg, refuse, err := wireBudgetLine(arg, *link); err != nil {
			bad++
			fmt.Fprintf(stderr, "%s: %v\n", arg, err)
			continue
		} else if refuse && !*force {
			bad++
			fmt.Fprintf(stderr, "%s: %s\n", arg, msg)
			continue
		} else if msg != "" {
			fmt.Fprintf(stdout, "%s: warning: %s\n", arg, msg)
		}
		fmt.Fprintf(stdout, "%s: ok\n", arg)
	}
	if bad > 0 {
		fmt.Fprintf(stderr, "gaitrig check: %d of %d scenarios have problems\n", bad, fs.NArg())
		return exitConfig
	}
	return exitPass
}

// checkOne validates one scenario down to a buildable plant model and loop
// configuration.
func checkOne(arg string) error {
	sc, err := resolveScenario(arg)
	if err != nil {
		return err
	}
	return rig.Check(sc)
}

func cmdScenarios(args []string, stdout, stderr io.Writer) int {
	fs := newFlagSet("scenarios", "", "Lists the built-in scenarios with their descriptions. Any of these names works where a SCENARIO is asked for.", stderr)
	if done, code := parseFlags(fs, args); done {
		return code
	}
	for _, e := range scenarios.Library() {
		fmt.Fprintf(stdout, "%-20s %s\n", e.Name, e.Description)
	}
	return exitPass
}

// wireBudgetLine is the wire-time warning for one scenario over link ("":
// the scenario's), "" when its link has no baud rate or the budget fits;
// refuse says a wall-clock run would be refused.
func wireBudgetLine(arg, link string) (string, bool, error) {
	sc, err := resolveScenario(arg)
	if err != nil {
		return "", false, err
	}
	wb, ok, err := rig.CheckWireBudget(sc, link, 0, "")
	if err != nil || !ok {
		return "", false, err
	}
	return wb.Message, wb.Refuse, nil
}
