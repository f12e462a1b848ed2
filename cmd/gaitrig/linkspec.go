package main

import (
	"fmt"
	"strconv"
	"strings"
)

// linkKind names the transports a run can use.
type linkKind string

const (
	linkBuiltin  linkKind = "builtin"  // reference firmware in this process, no wire
	linkEmbedded linkKind = "embedded" // reference firmware over the embedded MQTT broker
	linkPty      linkKind = "pty"      // reference firmware over a real pseudo-terminal pair
	linkSerial   linkKind = "serial"   // a board on a serial port
	linkMQTT     linkKind = "mqtt"     // controller code on an MQTT broker
)

// linkSpec is the parsed form of --link.
type linkSpec struct {
	Kind linkKind
	Port string // serial: device path
	Baud int    // serial: baud rate
	URL  string // mqtt: broker URL (tcp://host:port, ssl://host:port)
}

// linkHelp documents the --link syntax; it is shown by every command that
// takes the flag.
const linkHelp = `controller link: "builtin" (reference firmware in-process), "embedded"
(reference firmware over the embedded MQTT broker), "pty" (reference firmware
over a real pseudo-terminal pair, COBS frames as on a board), "serial:PORT[@BAUD]"
(a board, e.g. serial:/dev/ttyACM0@921600), or "mqtt:URL" (e.g.
mqtt:tcp://127.0.0.1:1883). Empty: what the scenario says.`

// parseLinkSpec reads a --link value.
func parseLinkSpec(s string) (linkSpec, error) {
	switch {
	case s == string(linkBuiltin):
		return linkSpec{Kind: linkBuiltin}, nil
	case s == string(linkEmbedded), s == "mqtt:embedded":
		return linkSpec{Kind: linkEmbedded}, nil
	case s == string(linkPty):
		return linkSpec{Kind: linkPty}, nil
	case strings.HasPrefix(s, "serial:"):
		rest := strings.TrimPrefix(s, "serial:")
		spec := linkSpec{Kind: linkSerial, Baud: 115200}
		if i := strings.LastIndex(rest, "@"); i >= 0 {
			b, err := strconv.Atoi(rest[i+1:])
			if err != nil || b <= 0 {
				return linkSpec{}, badUsage("--link %q: baud rate %q is not a positive whole number", s, rest[i+1:])
			}
			spec.Baud, rest = b, rest[:i]
		}
		if rest == "" {
			return linkSpec{}, badUsage("--link %q: no serial port given (e.g. serial:/dev/ttyACM0@921600)", s)
		}
		spec.Port = rest
		return spec, nil
	case strings.HasPrefix(s, "mqtt:"):
		u := strings.TrimPrefix(s, "mqtt:")
		if !strings.Contains(u, "://") {
			return linkSpec{}, badUsage("--link %q: the broker URL needs a scheme, e.g. mqtt:tcp://127.0.0.1:1883", s)
		}
		return linkSpec{Kind: linkMQTT, URL: u}, nil
	}
	return linkSpec{}, badUsage("--link %q: unknown link; allowed: builtin, embedded, pty, serial:PORT[@BAUD], mqtt:URL", s)
}

// shard is one slice of a scenario list: the K-th of N (1-based), for CI
// matrices that split the library across machines.
type shard struct{ K, N int }

// parseShard reads a --shard value "K/N".
func parseShard(s string) (shard, error) {
	if s == "" {
		return shard{1, 1}, nil
	}
	ks, ns, ok := strings.Cut(s, "/")
	k, err1 := strconv.Atoi(ks)
	n, err2 := strconv.Atoi(ns)
	if !ok || err1 != nil || err2 != nil || n < 1 || k < 1 || k > n {
		return shard{}, badUsage("--shard %q: want K/N with 1 ≤ K ≤ N, e.g. 2/4", s)
	}
	return shard{k, n}, nil
}

// pick reports whether item i (0-based, in a stable order) belongs to this shard.
func (s shard) pick(i int) bool { return i%s.N == s.K-1 }

func (s linkSpec) String() string {
	switch s.Kind {
	case linkSerial:
		return fmt.Sprintf("serial:%s@%d", s.Port, s.Baud)
	case linkMQTT:
		return "mqtt:" + s.URL
	}
	return string(s.Kind)
}
