package main

import "gaitrig/rig"

// version is set at link time with -ldflags "-X main.version=…" (or
// "-X gaitrig/rig.Version=…"); it then names the build in manifests too.
var version = ""

// toolVersion names this build for the version command.
func toolVersion() string {
	if version != "" {
		rig.Version = version
	}
	return rig.ToolVersion()
}
