package broker

import (
	"context"
	"fmt"
	"os/exec"
	"sort"
	"strings"
	"testing"
	"time"
)

// TestRetainedMessagesAreCapped: without accounts anyone on the host may
// connect as rig.<any id> and retain a status under every id it invents.
// Real MQTT clients (mosquitto_pub and mosquitto_sub, as an outside peer
// would use them) retain statuses on more topics than the cap allows: the
// ones over it reach the subscriber of the moment but are not kept (mochi's
// own store is counted, independently of ours), each is reported as a
// "retain" refusal, a late subscriber gets exactly the kept ones, clearing
// a topic frees its place, and a retained last will over the cap is not
// kept either.
func TestRetainedMessagesAreCapped(t *testing.T) {
	pub, sub := tool(t, "mosquitto_pub"), tool(t, "mosquitto_sub")
	notify, next := refusalChan(t)
	b := startBroker(t, Config{OnRefusal: notify, Limits: Limits{MaxRetained: 3, MaxRetainedBytes: 4096}})
	_, port, _ := strings.Cut(b.Addr(), ":")
	run := func(args ...string) string {
		t.Helper()
		ctx, cancel := context.WithTimeout(context.Background(), 4*wait)
		defer cancel()
		out, err := exec.CommandContext(ctx, args[0], append([]string{"-h", "127.0.0.1", "-p", port, "-V", "mqttv311"}, args[1:]...)...).CombinedOutput()
		if err != nil {
			t.Fatalf("%v: %v, output %q", args, err, out)
		}
		return string(out)
	}
	// waitUntil polls cond (an event of the broker), bounded by the wait.
	waitUntil := func(what string, cond func() bool) {
		t.Helper()
		for deadline := time.Now().Add(4 * wait); !cond(); time.Sleep(5 * time.Millisecond) {
			if time.Now().After(deadline) {
				t.Fatal(what)
			}
		}
	}
	retain := func(rigID, payload string) {
		t.Helper()
		// A client id is free again once the broker has seen the last
		// mosquitto_pub under it go.
		waitUntil("the broker still holds rig."+rigID, func() bool { return !b.Holds("rig." + rigID) })
		args := []string{pub, "-i", "rig." + rigID, "-q", "1", "-r", "-t", "gaitrig/" + rigID + "/status"}
		if payload == "" {
			args = append(args, "-n") // an empty retained message clears the topic
		} else {
			args = append(args, "-m", payload)
		}
		run(args...)
	}
	// mochi's own store, counted under our root (it also keeps its $SYS
	// topics, which no client can write).
	mochiKeeps := func() int {
		n := 0
		for topic := range b.server.Topics.Retained.GetAll() {
			if strings.HasPrefix(topic, "gaitrig/") {
				n++
			}
		}
		return n
	}
	live := watch(t, b, "gaitrig/+/status")

	for i := 1; i <= 3; i++ {
		retain(fmt.Sprintf("r%d", i), `{"state":"online"}`)
		live.next(t)
	}
	retain("r4", `{"state":"online"}`)
	if msgs := live.next(t); msgs[len(msgs)-1] != `gaitrig/r4/status {"state":"online"}` {
		t.Errorf("the status over the cap did not reach the subscriber of the moment: %q", msgs)
	}
	r := next()
	if r.Kind != RefusedRetain || r.ClientID != "rig.r4" || r.Topic != "gaitrig/r4/status" || !strings.Contains(r.Reason, "limit of 3 topics") {
		t.Errorf("refusal %+v, want the retained status of rig.r4 refused for the 3-topic limit", r)
	}
	if n, _ := b.Retained(); n != 3 || mochiKeeps() != 3 {
		t.Errorf("the broker counts %d retained topics and mochi keeps %d, want 3", n, mochiKeeps())
	}
	// A topic already kept may be updated at the cap.
	retain("r2", `{"state":"offline"}`)
	live.next(t)
	// A late subscriber gets exactly the kept messages.
	out := run(sub, "-i", "monitor.late", "-t", "gaitrig/+/status", "-v", "--retained-only", "-C", "3", "-W", "10")
	lines := strings.Split(strings.TrimSpace(out), "\n")
	sort.Strings(lines)
	want := []string{`gaitrig/r1/status {"state":"online"}`, `gaitrig/r2/status {"state":"offline"}`, `gaitrig/r3/status {"state":"online"}`}
	if fmt.Sprint(lines) != fmt.Sprint(want) {
		t.Errorf("a late subscriber got %q, want %q", lines, want)
	}
	// Clearing a topic frees its place.
	retain("r1", "")
	live.next(t)
	retain("r4", `{"state":"online"}`)
	live.next(t)
	if n, bytes := b.Retained(); n != 3 || mochiKeeps() != 3 || bytes != int64(3*len("gaitrig/rN/status")+2*len(`{"state":"online"}`)+len(`{"state":"offline"}`)) {
		t.Errorf("after clearing r1 and retaining r4: %d topics, %d bytes counted; mochi keeps %d", n, bytes, mochiKeeps())
	}
	if _, ok := b.server.Topics.Retained.Get("gaitrig/r4/status"); !ok {
		t.Error("r4's status was not kept once r1's was cleared")
	}
	// A last will is another way to leave a retained message: kill a client
	// whose will is a retained status, over the cap.
	ctx, cancel := context.WithTimeout(context.Background(), 4*wait)
	defer cancel()
	cmd := exec.CommandContext(ctx, sub, "-h", "127.0.0.1", "-p", port, "-V", "mqttv311", "-i", "rig.r5", "-t", "gaitrig/r5/command",
		"--will-topic", "gaitrig/r5/status", "--will-payload", "gone", "--will-retain", "--will-qos", "1")
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	waitUntil("mosquitto_sub as rig.r5 never connected", func() bool { return b.Holds("rig.r5") })
	cmd.Process.Kill()
	cmd.Wait()
	if msgs := live.next(t); msgs[len(msgs)-1] != "gaitrig/r5/status gone" {
		t.Errorf("the last will did not reach the subscriber: %q", msgs)
	}
	r = next()
	if r.Kind != RefusedRetain || r.ClientID != "rig.r5" || !strings.HasPrefix(r.Reason, "last will: ") {
		t.Errorf("refusal %+v, want rig.r5's retained will refused", r)
	}
	if n, _ := b.Retained(); n != 3 || mochiKeeps() != 3 {
		t.Errorf("after the will: %d topics counted, mochi keeps %d, want 3", n, mochiKeeps())
	}
	if got := b.RefusalsByKind()[RefusedRetain]; got != 2 {
		t.Errorf("%d retain refusals counted, want 2", got)
	}
}

// The byte cap: a retained message that would take the retained messages
// over MaxRetainedBytes is not kept, even on a topic already kept.
func TestRetainedBytesAreCapped(t *testing.T) {
	notify, next := refusalChan(t)
	b := startBroker(t, Config{OnRefusal: notify, Limits: Limits{MaxRetainedBytes: 100}})
	c := mustDial(t, b, clientOpts{id: "rig.b1"})
	small := strings.Repeat("x", 50)
	if tok := c.Publish("gaitrig/b1/status", 1, true, small); !tok.WaitTimeout(wait) || tok.Error() != nil {
		t.Fatal(tok.Error())
	}
	if tok := c.Publish("gaitrig/b1/status", 1, true, strings.Repeat("y", 90)); !tok.WaitTimeout(wait) || tok.Error() != nil {
		t.Fatal(tok.Error())
	}
	if r := next(); r.Kind != RefusedRetain || !strings.Contains(r.Reason, "limit of 100 bytes") {
		t.Errorf("refusal %+v", r)
	}
	pk, ok := b.server.Topics.Retained.Get("gaitrig/b1/status")
	if !ok || string(pk.Payload) != small {
		t.Errorf("mochi keeps %q, want the earlier status %q", pk.Payload, small)
	}
	if n, bytes := b.Retained(); n != 1 || bytes != int64(len("gaitrig/b1/status")+50) {
		t.Errorf("%d topics, %d bytes counted", n, bytes)
	}
}
