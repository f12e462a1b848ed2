package mqtt

import (
	"fmt"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// The rig side and the firmware side of the link both satisfy these.
var (
	_ bridges.Conn     = (*Conn)(nil)
	_ bridges.Notifier = (*Conn)(nil)
)

// Send encodes m (as a binary frame, or as JSON in debug mode) and publishes
// it on the topic its direction and type call for. An invalid message is
// refused with the encoder's error before anything is sent.
func (c *Conn) Send(m *protocol.Message) error {
	var p []byte
	if c.cfg.JSON {
		var err error
		p, err = protocol.AppendJSON(c.sendBuf[:0], m)
		if err != nil {
			return fmt.Errorf("mqtt: %s message not sent: %w", m.Type.Name(), err)
		}
	} else {
		n, err := protocol.Encode(c.sendBuf[:], m)
		if err != nil {
			return fmt.Errorf("mqtt: %s message not sent: %w", m.Type.Name(), err)
		}
		p = c.sendBuf[:n]
	}
	return c.publish(p, m.Type == protocol.TypeStop)
}

// Recv waits until a valid message arrives, the deadline passes
// (bridges.ErrTimeout; a zero deadline waits forever) or the Conn is closed
// (bridges.ErrClosed). A payload that does not decode, or a message of a type
// the peer's direction never sends, is returned as a *bridges.FrameError
// and the link stays usable.
func (c *Conn) Recv(deadline time.Time, m *protocol.Message) error {
	in, err := c.next(deadline)
	if err != nil {
		return err
	}
	if c.cfg.JSON {
		err = protocol.ParseJSON(in.payload, m)
	} else {
		err = protocol.Decode(in.payload, m)
	}
	if err != nil {
		c.counts.FrameErrors.Add(1)
		return &bridges.FrameError{Reason: err.Error(), Bytes: len(in.payload), Err: err}
	}
	if !c.expected(m.Type, in.stop) {
		c.counts.FrameErrors.Add(1)
		return &bridges.FrameError{Reason: c.wrongTopic(m.Type, in.stop), Bytes: len(in.payload)}
	}
	c.counts.FramesReceived.Add(1)
	return nil
}

// expected reports whether a message of type t may arrive on the topic it
// came on, given who sends there.
func (c *Conn) expected(t protocol.Type, onStop bool) bool {
	if onStop {
		return t == protocol.TypeStop
	}
	switch t {
	case protocol.TypeHeartbeat:
		return true
	case protocol.TypeGreeting, protocol.TypeCommand:
		return c.cfg.Role == RoleRig // the firmware sends these
	case protocol.TypeConfig, protocol.TypeState:
		return c.cfg.Role == RoleFirmware // the rig sends these
	}
	return false
}

func (c *Conn) wrongTopic(t protocol.Type, onStop bool) string {
	topic := c.inTopic
	if onStop {
		topic = c.stopTopic
	}
	if t == protocol.TypeStop {
		return fmt.Sprintf("a stop message on %s: stops travel on %s only", topic, c.stopTopic)
	}
	return fmt.Sprintf("a %s message on %s, which carries no %s messages", t.Name(), topic, t.Name())
}
