package rig

import (
	"fmt"
	"strings"

	"gaitrig/bridges"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/scenarios"
)

// Link is a parsed --link value: which kind of link and where it goes.
type Link struct {
	// Kind is the Name of a registered LinkKind.
	Kind string
	// Addr is where the link goes, in the kind's own terms: a serial
	// device path, an MQTT broker URL; empty for kinds that start their
	// own peer (builtin, pty, embedded).
	Addr string
	// Baud is a serial link's baud rate; 0 for the others.
	Baud int
}

// String gives the link in --link syntax.
func (l Link) String() string {
	if k, ok := linkKinds[l.Kind]; ok && k.Format != nil {
		return k.Format(l)
	}
	return l.Kind
}

// InProcess reports whether the link's peer is the built-in firmware in
// this process with no wire between: lockstep runs over it give the same
// result however busy the machine is, so a batch may run them side by side.
func (l Link) InProcess() bool {
	k, ok := linkKinds[l.Kind]
	return ok && k.InProcess
}

// LinkKind is one way to reach a controller. Adding a link kind is one
// RegisterLinkKind call (see linkkinds.go for the built-in ones): the
// --link syntax, the help text, the scenario's controller block and the
// dialling all come from here.
type LinkKind struct {
	// Name is the kind's name (Link.Kind), as in "serial".
	Name string
	// Syntax is how --link spells it, as in "serial:PORT[@BAUD]".
	Syntax string
	// Help says in a few words what is at the other end.
	Help string
	// InProcess: the peer is the built-in firmware in this process (see
	// Link.InProcess).
	InProcess bool
	// Parse reads a --link text. ok is false when the text is not this
	// kind's; an error means it is, but malformed.
	Parse func(text string) (l Link, ok bool, err error)
	// Format writes the link back in --link syntax; nil: the name alone.
	Format func(l Link) string
	// FromScenario gives the link a scenario's controller block asks for;
	// ok is false when the block names another kind. nil: no scenario
	// names this kind (only --link does).
	FromScenario func(c *scenarios.Controller) (l Link, ok bool)
	// Dial opens the link. The returned Opened's Close tears down
	// everything Dial started (firmware goroutine, broker, pty).
	Dial func(d DialSetup) (Opened, error)
	// FirmwareEnd opens the firmware's end of the link, for the built-in
	// firmware run as its own process (ServeFirmware). announce tells the
	// person where the rig should connect when the link is new (a pty).
	// nil: a firmware cannot be served over this kind from outside.
	FirmwareEnd func(d DialSetup, announce func(string)) (bridges.Conn, func(), error)
}

// DialSetup is what a LinkKind's Dial gets: the parsed link and, for kinds
// that start the built-in firmware on the other end, how to run it.
type DialSetup struct {
	Link Link // the parsed link to dial (or to serve, for FirmwareEnd)
	// Rig is the MQTT rig id; never empty (default "bench").
	Rig string
	// Firmware is the built-in firmware's options (builtin, pty, embedded,
	// and mqtt with LocalFirmware).
	Firmware reference.Options
	// LocalFirmware also connects the built-in firmware to an outside MQTT
	// broker (the latency measurement); normally the firmware there is
	// someone else's.
	LocalFirmware bool
	// User and Password are the rig's MQTT login.
	User, Password string
	// Lockstep lets an in-process link run the firmware inside the rig's
	// Send (inproc.Direct): no goroutine hand-over per tick, the same
	// results. A wall-clock run keeps the firmware on its own goroutine so
	// its answers take the time they take.
	Lockstep bool
}

// Opened is a connected link and what it started.
type Opened struct {
	// Conn is the rig's end of the link.
	Conn bridges.Conn
	// Name describes the link for the manifest and the log.
	Name string
	// Alarms, when not nil, publishes alarms on the link (MQTT).
	Alarms hil.AlarmSink
	// Notices, when not nil, carries the refusals of a broker the link
	// started (the embedded broker) into the run as broker_refusal alarms.
	Notices *hil.Notices
	// Close closes the link and stops what Dial started.
	Close func()
}

var (
	linkKinds = map[string]LinkKind{}
	linkOrder []string // registration order: parse order and help order
)

// RegisterLinkKind adds a link kind. It panics on a duplicate name or a
// kind without Parse or Dial: both are programming errors found at start.
func RegisterLinkKind(k LinkKind) {
	if k.Name == "" || k.Parse == nil || k.Dial == nil {
		panic("rig: a link kind needs a name, Parse and Dial")
	}
	if _, dup := linkKinds[k.Name]; dup {
		panic("rig: link kind " + k.Name + " registered twice")
	}
	linkKinds[k.Name] = k
	linkOrder = append(linkOrder, k.Name)
}

// LinkKinds lists the registered link kinds in registration order.
func LinkKinds() []LinkKind {
	out := make([]LinkKind, len(linkOrder))
	for i, n := range linkOrder {
		out[i] = linkKinds[n]
	}
	return out
}

// ParseLink reads a --link value; an error is a configuration error that
// quotes the text and lists what is allowed.
func ParseLink(text string) (Link, error) {
	for _, n := range linkOrder {
		l, ok, err := linkKinds[n].Parse(text)
		if err != nil {
			return Link{}, ConfigError(err)
		}
		if ok {
			return l, nil
		}
	}
	syntax := make([]string, len(linkOrder))
	for i, n := range linkOrder {
		syntax[i] = linkKinds[n].Syntax
	}
	return Link{}, Configf("--link %q: unknown link; allowed: %s", text, strings.Join(syntax, ", "))
}

// LinkHelp documents the --link syntax for every command that takes the
// flag, from the registry: one kind per line.
func LinkHelp() string {
	var b strings.Builder
	b.WriteString("controller link, one of:")
	for _, n := range linkOrder {
		k := linkKinds[n]
		fmt.Fprintf(&b, "\n%q: %s", k.Syntax, k.Help)
	}
	b.WriteString("\nEmpty: what the scenario says.")
	return b.String()
}

// ScenarioLink is the link a scenario's controller block asks for.
func ScenarioLink(sc *scenarios.Scenario) (Link, error) {
	for _, n := range linkOrder {
		k := linkKinds[n]
		if k.FromScenario == nil {
			continue
		}
		if l, ok := k.FromScenario(&sc.Controller); ok {
			return l, nil
		}
	}
	return Link{}, Configf("scenario %s: controller.link %q is not supported here", sc.Name, sc.Controller.Link)
}

// Dial opens a link by its registered kind.
func Dial(d DialSetup) (Opened, error) {
	k, ok := linkKinds[d.Link.Kind]
	if !ok {
		return Opened{}, Configf("unknown link %q", d.Link.Kind)
	}
	if d.Rig == "" {
		d.Rig = "bench"
	}
	return k.Dial(d)
}
