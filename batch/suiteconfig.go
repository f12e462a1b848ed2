package batch

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/goccy/go-yaml/ast"
	"github.com/goccy/go-yaml/parser"

	"gaitrig/rig"
)

// SuiteConfigFile is the name of a suite's configuration in a scenario
// folder.
const SuiteConfigFile = "suite.yaml"

// maxSuiteConfigBytes bounds suite.yaml before it is parsed: a list of
// names needs far less.
const maxSuiteConfigBytes = 1 << 20

// SuiteConfig is a suite's configuration (suite.yaml in the scenario
// folder):
//
//	quarantine:        # run and reported, but do not fail the suite
//	  - treadmill-ramp
//
// A quarantined scenario still runs, its verdict is in the summary, page
// and JUnit file (as skipped, with what went wrong), but it does not make
// the suite exit non-zero: for a scenario known to be broken while a fix
// is under way, without losing sight of it.
type SuiteConfig struct {
	// Path is the file it was read from ("" when there was none).
	Path string
	// Quarantine holds the quarantined scenario names.
	Quarantine map[string]bool
}

// ReadSuiteConfig reads suite.yaml from folder dir; a folder without one
// gives an empty configuration. known lists every scenario name of the
// suite: a quarantined name that is not among them is an error (a typo
// would otherwise quarantine nothing, silently). Errors name
// file:line: field and wrap rig.ErrConfig.
func ReadSuiteConfig(dir string, known []string) (SuiteConfig, error) {
	path := filepath.Join(dir, SuiteConfigFile)
	cfg := SuiteConfig{Quarantine: map[string]bool{}}
	st, err := os.Stat(path)
	if os.IsNotExist(err) {
		return cfg, nil
	}
	if err != nil {
		return cfg, rig.Configf("%s: %v", path, err)
	}
	if st.Size() > maxSuiteConfigBytes {
		return cfg, rig.Configf("%s: %d bytes, more than the %d a suite configuration may have", path, st.Size(), maxSuiteConfigBytes)
	}
	text, err := os.ReadFile(path)
	if err != nil {
		return cfg, rig.Configf("%s: %v", path, err)
	}
	cfg.Path = path
	f, err := parser.ParseBytes(text, 0)
	if err != nil {
		return cfg, rig.Configf("%s: not valid YAML: %v", path, err)
	}
	at := func(n ast.Node) string {
		if t := n.GetToken(); t != nil && t.Position != nil {
			return fmt.Sprintf("%s:%d", path, t.Position.Line)
		}
		return path
	}
	isKnown := map[string]bool{}
	for _, k := range known {
		isKnown[k] = true
	}
	for _, doc := range f.Docs {
		body := doc.Body
		if body == nil {
			continue
		}
		if _, ok := body.(*ast.CommentGroupNode); ok {
			continue
		}
		var kv []*ast.MappingValueNode
		switch b := body.(type) {
		case *ast.MappingNode:
			kv = b.Values
		case *ast.MappingValueNode:
			kv = []*ast.MappingValueNode{b}
		default:
			return cfg, rig.Configf("%s: want a mapping with the field quarantine", at(body))
		}
		for _, p := range kv {
			key := p.Key.GetToken().Value
			if key != "quarantine" {
				return cfg, rig.Configf("%s: %s: unknown field (the one field is quarantine)", at(p.Key), key)
			}
			var items []ast.Node
			switch v := p.Value.(type) {
			case *ast.SequenceNode:
				items = v.Values
			case *ast.NullNode:
			default:
				return cfg, rig.Configf("%s: quarantine: want a list of scenario names", at(p.Value))
			}
			for i, it := range items {
				s, ok := it.(*ast.StringNode)
				if !ok {
					return cfg, rig.Configf("%s: quarantine[%d]: want a scenario name, got %s", at(it), i, it.GetToken().Value)
				}
				if !isKnown[s.Value] {
					return cfg, rig.Configf("%s: quarantine[%d]: %q is not a scenario of this suite", at(it), i, s.Value)
				}
				cfg.Quarantine[s.Value] = true
			}
		}
	}
	return cfg, nil
}
