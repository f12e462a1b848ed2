package rig

import "runtime/debug"

// Version names this build when set at link time
// (-ldflags "-X gaitrig/rig.Version=…"); otherwise ToolVersion reads the
// module's build information.
var Version = ""

// ToolVersion names this build for manifests and reports: Version, else
// the VCS revision the binary was built from ("dev+<rev>[-dirty]"), else
// the module version, else "dev".
func ToolVersion() string {
	if Version != "" {
		return Version
	}
	if bi, ok := debug.ReadBuildInfo(); ok {
		rev, dirty := "", false
		for _, s := range bi.Settings {
			switch s.Key {
			case "vcs.revision":
				rev = s.Value
			case "vcs.modified":
				dirty = s.Value == "true"
			}
		}
		if rev != "" {
			if len(rev) > 12 {
				rev = rev[:12]
			}
			if dirty {
				rev += "-dirty"
			}
			return "dev+" + rev
		}
		if bi.Main.Version != "" && bi.Main.Version != "(devel)" {
			return bi.Main.Version
		}
	}
	return "dev"
}
