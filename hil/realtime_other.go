//go:build !linux

package hil

// requestRealtime is not available off Linux; the loop runs in the normal
// scheduling class and the log says so.
func requestRealtime(priority int) (granted bool, detail string) {
	return false, "real-time scheduling is only requested on Linux; running in the normal class"
}

func dropRealtime() {}
