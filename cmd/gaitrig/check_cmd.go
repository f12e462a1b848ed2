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
configuration. Problems are printed as file:line: field: message. Exit code 0
when all are valid, 2 otherwise.`, stderr)
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
