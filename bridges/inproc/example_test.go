package inproc_test

import (
	"fmt"
	"time"

	"gaitrig/bridges/inproc"
	"gaitrig/bridges/protocol"
)

// A state goes from the rig end to the firmware end, and the command that
// echoes its sequence number comes back.
func ExamplePair() {
	rig, fw := inproc.Pair()
	defer rig.Close()

	state := protocol.Message{Type: protocol.TypeState, Seq: 7}
	rig.Send(&state)

	var got protocol.Message
	fw.Recv(time.Now().Add(time.Second), &got)
	reply := protocol.Message{Type: protocol.TypeCommand, Seq: got.Seq}
	reply.Command.Joints = 2
	reply.Command.Torque[0] = 1.5
	fw.Send(&reply)

	rig.Recv(time.Now().Add(time.Second), &got)
	fmt.Println(got.Seq, got.Command.Torque[0])
	// Output: 7 1.5
}
