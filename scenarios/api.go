package scenarios

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"strings"
)

// Problem is one thing wrong with a scenario file, located by line, column
// and field path.
type Problem struct {
	File   string // file name as given to the loader
	Line   int    // 1-based line, 0 when unknown
	Column int    // 1-based column, 0 when unknown
	Path   string // field path such as plant.legs.foot_radius_m or faults[1].rate
	Msg    string // what is wrong and what is allowed
}

// String formats the problem as file:line: path: message.
func (p Problem) String() string {
	var b strings.Builder
	b.WriteString(p.File)
	if p.Line > 0 {
		fmt.Fprintf(&b, ":%d", p.Line)
	}
	b.WriteString(": ")
	if p.Path != "" {
		b.WriteString(p.Path)
		b.WriteString(": ")
	}
	b.WriteString(p.Msg)
	return b.String()
}

// Error is returned by the loader when a scenario is malformed. It carries
// every problem found, in file order.
type Error struct {
	Problems []Problem // sorted by line
}

// Error joins the problems one per line.
func (e *Error) Error() string {
	lines := make([]string, len(e.Problems))
	for i, p := range e.Problems {
		lines[i] = p.String()
	}
	return strings.Join(lines, "\n")
}

// Hash returns the hex SHA-256 of a scenario file's exact bytes, as stored in
// run manifests.
func Hash(text []byte) string {
	sum := sha256.Sum256(text)
	return hex.EncodeToString(sum[:])
}
