package broker

import (
	"fmt"
	"sync"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/packets"
)

// retainedCap keeps the broker's own count of the retained messages mochi
// stores (one per topic; an empty payload clears the topic), so that a
// retained message over Limits.MaxRetained or MaxRetainedBytes can be
// stripped of its retain flag before mochi stores it. The count is taken
// where the decision is made, in OnPublish and OnWill, which mochi calls
// just before it stores the message: two clients racing for the last place
// cannot both get it.
type retainedCap struct {
	maxTopics int
	maxBytes  int64

	mu    sync.Mutex
	size  map[string]int64 // topic → len(topic) + len(payload) of its retained message
	bytes int64
}

func newRetainedCap(maxTopics int, maxBytes int64) *retainedCap {
	return &retainedCap{maxTopics: maxTopics, maxBytes: maxBytes, size: make(map[string]int64)}
}

// take accounts for a retained message of payload bytes on topic and
// returns "" when it may be kept, or why it may not.
func (c *retainedCap) take(topic string, payload int) string {
	c.mu.Lock()
	defer c.mu.Unlock()
	old, held := c.size[topic]
	if payload == 0 { // clears the topic: always taken
		if held {
			delete(c.size, topic)
			c.bytes -= old
		}
		return ""
	}
	n := int64(len(topic) + payload)
	if !held && len(c.size) >= c.maxTopics {
		return fmt.Sprintf("retained message not kept: the broker already keeps retained messages on its limit of %d topics (delivered to the subscribers of the moment only)", c.maxTopics)
	}
	if c.bytes-old+n > c.maxBytes {
		return fmt.Sprintf("retained message of %d bytes not kept: the retained messages would hold more than the broker's limit of %d bytes (delivered to the subscribers of the moment only)", n, c.maxBytes)
	}
	c.size[topic] = n
	c.bytes += n - old
	return ""
}

func (c *retainedCap) usage() (int, int64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.size), c.bytes
}

// OnPublish strips the retain flag of a retained publish over the cap, so
// mochi delivers it without keeping it, and reports the refusal. Other
// publishes pass untouched (and without allocating).
func (r *rules) OnPublish(cl *mochi.Client, pk packets.Packet) (packets.Packet, error) {
	if !pk.FixedHeader.Retain {
		return pk, nil
	}
	if why := r.retained.take(pk.TopicName, len(pk.Payload)); why != "" {
		pk.FixedHeader.Retain = false
		r.refusals.report(Refusal{Kind: RefusedRetain, ClientID: cl.ID, Username: string(cl.Properties.Username),
			Remote: cl.Net.Remote, Topic: pk.TopicName, Reason: why})
	}
	return pk, nil
}

// OnWill does for a retained last will what OnPublish does for a retained
// publish: a client that dies is another way to leave a retained message.
func (r *rules) OnWill(cl *mochi.Client, will mochi.Will) (mochi.Will, error) {
	if !will.Retain {
		return will, nil
	}
	if why := r.retained.take(will.TopicName, len(will.Payload)); why != "" {
		will.Retain = false
		r.refusals.report(Refusal{Kind: RefusedRetain, ClientID: cl.ID, Username: string(cl.Properties.Username),
			Remote: cl.Net.Remote, Topic: will.TopicName, Reason: "last will: " + why})
	}
	return will, nil
}
