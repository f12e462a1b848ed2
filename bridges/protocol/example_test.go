package protocol_test

import (
	"bytes"
	"errors"
	"fmt"

	"gaitrig/bridges/protocol"
)

// A heartbeat frame, its stream form, and what a receiver gets back.
func Example() {
	m := protocol.Message{Type: protocol.TypeHeartbeat, Seq: 42}
	frame := make([]byte, protocol.MaxFrameLen)
	n, err := protocol.Encode(frame, &m)
	if err != nil {
		panic(err)
	}
	fmt.Printf("frame: % x\n", frame[:n])

	wire, _ := protocol.AppendWire(nil, make([]byte, protocol.MaxFrameLen), &m)
	fmt.Printf("wire:  % x\n", wire)

	// Garbage before the frame costs one error, then the frame decodes.
	stream := append([]byte{0x13, 0x37, 0x00}, wire...)
	r := protocol.NewReader(bytes.NewReader(stream))
	var got protocol.Message
	err = r.ReadMessage(&got)
	fmt.Println("first:", err)
	err = r.ReadMessage(&got)
	fmt.Println("second:", err, got.Type, got.Seq)
	// Output:
	// frame: 02 20 2a 00 00 00 00 00 64 63
	// wire:  04 02 20 2a 01 01 01 01 03 64 63 00
	// first: bad COBS: code byte 0x13 at offset 0 runs past the end of the frame
	// second: <nil> heartbeat 42
}

// A frame from a peer of another protocol version is refused with both
// versions named.
func ExampleDecode_version() {
	m := protocol.Message{Type: protocol.TypeHeartbeat}
	frame := make([]byte, protocol.MaxFrameLen)
	n, _ := protocol.Encode(frame, &m)
	frame[0] = 3 // pretend a version-3 sender
	crc := protocol.CRC16(frame[:n-2])
	frame[n-2], frame[n-1] = byte(crc), byte(crc>>8)
	err := protocol.Decode(frame[:n], &m)
	fmt.Println(err)
	fmt.Println(errors.Is(err, protocol.ErrVersion))
	// Output:
	// wrong protocol version: the frame speaks version 3, this side speaks versions 1 to 2
	// true
}

func ExampleCRC16() {
	fmt.Printf("0x%04X\n", protocol.CRC16([]byte("123456789")))
	// Output: 0x29B1
}
