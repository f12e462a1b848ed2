package protocol

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
)

func TestJSONRoundTrip(t *testing.T) {
	for _, tc := range exampleMessages() {
		b, err := AppendJSON(nil, &tc.msg)
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		if !json.Valid(b) {
			t.Fatalf("%s: invalid JSON %s", tc.name, b)
		}
		var back Message
		if err := ParseJSON(b, &back); err != nil {
			t.Fatalf("%s: ParseJSON(%s): %v", tc.name, b, err)
		}
		if back != tc.msg {
			t.Errorf("%s: JSON round trip\n got %+v\nwant %+v", tc.name, back, tc.msg)
		}
	}
}

func TestJSONSpecialValues(t *testing.T) {
	m := Message{Type: TypeCommand, Seq: 3, Command: Command{Joints: 3,
		Torque: [MaxJoints]float32{float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1))}}}
	b, _ := AppendJSON(nil, &m)
	want := `{"type":"command","seq":3,"version":2,"joints":3,"status":0,"torque":["NaN","+Inf","-Inf"]}`
	if string(b) != want {
		t.Fatalf("got %s\nwant %s", b, want)
	}
	var back Message
	if err := ParseJSON(b, &back); err != nil {
		t.Fatal(err)
	}
	tq := back.Command.Torque
	if !math.IsNaN(float64(tq[0])) || !math.IsInf(float64(tq[1]), 1) || !math.IsInf(float64(tq[2]), -1) {
		t.Errorf("special values lost: %v", tq[:3])
	}
	s := Message{Type: TypeStop, Stop: Stop{Text: "a\"b\\c\n\x01\xff"}}
	b, _ = AppendJSON(nil, &s)
	if !json.Valid(b) || !strings.Contains(string(b), `a\"b\\c\u000a\u0001\ufffd`) {
		t.Errorf("escaping: %s", b)
	}
}

func TestParseJSONErrors(t *testing.T) {
	tests := []struct{ name, in, substr string }{
		{"unknown type", `{"type":"dance","seq":1}`, `unknown type "dance"`},
		{"unknown key", `{"type":"heartbeat","seq":1,"volume":11}`, `unknown field "volume"`},
		{"array length", `{"type":"command","seq":1,"joints":2,"status":0,"torque":[1]}`, `"torque" has 1 entries, joints is 2`},
		{"joints 0", `{"type":"command","seq":1,"joints":0,"status":0,"torque":[]}`, `joints 0`},
		{"bad float", `{"type":"command","seq":1,"joints":1,"status":0,"torque":["lots"]}`, `not a float32`},
		{"not JSON", `{"type":`, `JSON message`},
		{"v1 config with watchdog", `{"type":"config","seq":0,"version":1,"tick_hz":1000,"lockstep":true,"joints":1,"joint_names":["hip"],"torque_limit":[1],"watchdog_us":5}`, `not a field of a version-1 config`},
		{"v2 config without watchdog", `{"type":"config","seq":0,"version":2,"tick_hz":1000,"lockstep":true,"joints":1,"joint_names":["hip"],"torque_limit":[1]}`, `version 2 needs "watchdog_us"`},
		{"version 3", `{"type":"heartbeat","seq":0,"version":3}`, `speaks version 3`},
	}
	for _, tc := range tests {
		err := ParseJSON([]byte(tc.in), new(Message))
		if err == nil || !strings.Contains(err.Error(), tc.substr) {
			t.Errorf("%s: err = %v, want mention of %s", tc.name, err, tc.substr)
		}
	}
}
