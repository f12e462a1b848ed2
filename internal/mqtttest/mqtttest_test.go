package mqtttest

import (
	"net"
	"testing"
)

// The address it gives accepts a TCP connection on loopback.
func TestMosquittoAddrListens(t *testing.T) {
	addr := MosquittoAddr(t)
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		t.Fatal(err)
	}
	if ip := net.ParseIP(host); ip == nil || !ip.IsLoopback() {
		t.Errorf("broker address %s is not on loopback", addr)
	}
	c, err := net.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	c.Close()
}
