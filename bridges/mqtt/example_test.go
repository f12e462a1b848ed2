package mqtt_test

import (
	"fmt"
	"time"

	"gaitrig/bridges/broker"
	"gaitrig/bridges/mqtt"
	"gaitrig/bridges/protocol"
)

// A rig and its firmware talking through the embedded broker on loopback.
func Example() {
	b, err := broker.Start(broker.Config{}) // 127.0.0.1, free port, no accounts
	if err != nil {
		fmt.Println(err)
		return
	}
	defer b.Close()

	url := "tcp://" + b.Addr()
	rig, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: "bench1", Role: mqtt.RoleRig})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer rig.Close()
	fw, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: "bench1", Role: mqtt.RoleFirmware})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer fw.Close()

	st := protocol.Message{Type: protocol.TypeState, Seq: 1, State: protocol.State{TimeUS: 1000, Joints: 1}}
	if err := rig.Send(&st); err != nil {
		fmt.Println(err)
		return
	}
	var in protocol.Message
	if err := fw.Recv(time.Now().Add(5*time.Second), &in); err != nil {
		fmt.Println(err)
		return
	}
	cmd := protocol.Message{Type: protocol.TypeCommand, Seq: in.Seq, Command: protocol.Command{Joints: 1}}
	cmd.Command.Torque[0] = 1.5
	if err := fw.Send(&cmd); err != nil {
		fmt.Println(err)
		return
	}
	if err := rig.Recv(time.Now().Add(5*time.Second), &in); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("command %d: torque %.1f N·m\n", in.Seq, in.Command.Torque[0])
	// Output: command 1: torque 1.5 N·m
}
