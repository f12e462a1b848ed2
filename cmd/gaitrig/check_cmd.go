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
	jsonResults["check"] = []checkResult{}
	jsonResults["scenarios"] = []scenarioEntry{}
}

// checkResult is one scenario of check --json.
type checkResult struct {
	Scenario string         `json:"scenario"`           // the argument as given
	OK       bool           `json:"ok"`                 // valid down to a buildable model and loop
	Problems []checkProblem `json:"problems"`           // empty when OK
	Warnings []string       `json:"warnings,omitempty"` // e.g. a serial line too slow for the tick rate (docs/protocol.md section 13)
}

// checkProblem is one problem of a scenario file.
type checkProblem struct {
	File    string `json:"file"`    // the file (or argument) the problem is in
	Line    int    `json:"line"`    // 1-based, 0 when unknown
	Column  int    `json:"column"`  // 1-based, 0 when unknown
	Field   string `json:"field"`   // field path such as plant.legs.foot_radius_m
	Message string `json:"message"` // what is wrong and what is allowed
}

// scenarioEntry is one built-in scenario of scenarios --json.
type scenarioEntry struct {
	Name        string `json:"name"`        // the name to give where a SCENARIO is asked for
	Description string `json:"description"` // one sentence
}

func cmdCheck(args []string, stdout, stderr io.Writer) int {
	c := newCmdline("check", "SCENARIO...", `
Loads and validates each scenario (file or built-in name) as a run would:
the YAML schema, units and ranges, the plant parameters and the loop
configuration. Problems are printed as file:line: field: message. For a
serial link (the scenario's, or --link serial:PORT@BAUD or pty@BAUD) it also
computes the wire time of a state and a command at the baud rate and warns
when it is longer than a tick, naming the lowest standard baud rate and the
highest tick rate that fit (docs/protocol.md section 13); a wall-clock
scenario a run would refuse counts as a problem unless --force. Exit code 0
when all are valid, 2 otherwise.`, stdout, stderr)
	link := c.String("link", "", "check against this `LINK` instead of the scenario's (see gaitrig run --help)")
	force := c.Bool("force", false, "a wire-time overrun of a wall-clock scenario is only a warning, as with run --force")
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() == 0 {
		return c.usageError("want at least one SCENARIO")
	}
	bad := 0
	results := []checkResult{}
	for _, arg := range c.Args() {
		res := checkResult{Scenario: arg, OK: true, Problems: []checkProblem{}}
		if err := checkOne(arg); err != nil {
			bad++
			res.OK = false
			var se *scenarios.Error
			if errors.As(err, &se) {
				for _, p := range se.Problems {
					res.Problems = append(res.Problems, checkProblem{p.File, p.Line, p.Column, p.Path, p.Msg})
					if !c.jsonMode() {
						fmt.Fprintln(stderr, p.String())
					}
				}
			} else {
				res.Problems = append(res.Problems, checkProblem{File: arg, Message: err.Error()})
				if !c.jsonMode() {
					fmt.Fprintf(stderr, "%s: %v\n", arg, err)
				}
			}
		} else if !c.jsonMode() {
			fmt.Fprintf(stdout, "%s: ok\n", arg)
		}
		if res.OK {
			if msg, refuse, err := wireBudgetLine(arg, *link); err != nil {
				bad++
				res.OK = false
				res.Problems = append(res.Problems, checkProblem{File: arg, Message: err.Error()})
				if !c.jsonMode() {
					fmt.Fprintf(stderr, "%s: %v\n", arg, err)
				}
			} else if refuse && !*force {
				bad++
				res.OK = false
				res.Problems = append(res.Problems, checkProblem{File: arg, Message: msg})
				if !c.jsonMode() {
					fmt.Fprintf(stderr, "%s: %s\n", arg, msg)
				}
			} else if msg != "" {
				res.Warnings = append(res.Warnings, msg)
				if !c.jsonMode() {
					fmt.Fprintf(stdout, "%s: warning: %s\n", arg, msg)
				}
			}
		}
		results = append(results, res)
	}
	code := exitPass
	if bad > 0 {
		fmt.Fprintf(stderr, "gaitrig check: %d of %d scenarios have problems\n", bad, c.NArg())
		code = exitConfig
	}
	if c.jsonMode() {
		return c.printJSON(results, code)
	}
	return code
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
	c := newCmdline("scenarios", "", "Lists the built-in scenarios with their descriptions. Any of these names works where a SCENARIO is asked for.", stdout, stderr)
	c.jsonFlag()
	if done, code := c.parse(args); done {
		return code
	}
	if c.NArg() != 0 {
		return c.usageError("takes no arguments, got %q", c.Args())
	}
	lib := scenarios.Library()
	entries := make([]scenarioEntry, 0, len(lib))
	width := 0
	for _, e := range lib {
		entries = append(entries, scenarioEntry{e.Name, e.Description})
		width = max(width, len(e.Name))
	}
	if c.jsonMode() {
		return c.printJSON(entries, exitPass)
	}
	for _, e := range entries {
		fmt.Fprintf(stdout, "%-*s  %s\n", width, e.Name, e.Description)
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
