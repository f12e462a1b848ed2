package serial_test

import (
	"fmt"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
)

// A rig and a firmware over a real pseudo-terminal pair: the rig opens the
// follower by path, as it would open a board's port; the firmware side
// speaks over the master.
func Example() {
	pty, err := serial.NewPty()
	if err != nil {
		fmt.Println(err)
		return
	}
	rig, err := serial.Open(serial.Config{Port: pty.Path})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer rig.Close()
	pty.ReleaseFollower()
	fw := serial.NewConn(pty.Master, "firmware side", serial.Config{})
	defer fw.Close()

	hello := protocol.Message{Type: protocol.TypeGreeting,
		Greeting: protocol.Greeting{Actuators: 2, Name: "example-fw", Build: "1"}}
	if err := fw.Send(&hello); err != nil {
		fmt.Println(err)
		return
	}
	var m protocol.Message
	if err := rig.Recv(time.Now().Add(2*time.Second), &m); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(m.Type, m.Greeting.Name, m.Greeting.Actuators, m.Greeting.Version)
	// Output: greeting example-fw 2 2
}
