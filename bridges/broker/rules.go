package broker

import (
	"crypto/subtle"
	"fmt"
	"log/slog"
	"strings"
	"sync/atomic"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/packets"

	"gaitrig/bridges/topics"
)

// rules is the mochi hook that logs clients in and applies the access rules
// described in the package comment.
type rules struct {
	mochi.HookBase
	root      string
	accounts  map[string]Account // empty: anonymous, identity from client id
	onRefusal func(Refusal)
	log       *slog.Logger
	refused   atomic.Uint64
}

// identity is who a client is for the access rules.
type identity struct {
	role Role
	rig  string
}

func (r *rules) ID() string { return "gaitrig-access-rules" }

func (r *rules) Provides(b byte) bool {
	return b == mochi.OnConnectAuthenticate || b == mochi.OnACLCheck
}

// OnConnectAuthenticate checks the username and password (when accounts are
// configured) and that the last will, if any, names a topic the client may
// publish to.
func (r *rules) OnConnectAuthenticate(cl *mochi.Client, pk packets.Packet) bool {
	if len(r.accounts) > 0 {
		a, ok := r.accounts[string(pk.Connect.Username)]
		if !ok || subtle.ConstantTimeCompare([]byte(a.Password), pk.Connect.Password) != 1 {
			r.refuse(cl.ID, pk.Connect.Username, "", "connect", "unknown username or wrong password")
			return false
		}
	}
	if pk.Connect.WillFlag {
		id := r.identify(pk.Connect.ClientIdentifier, pk.Connect.Username)
		if !r.may(id, pk.Connect.WillTopic, true) {
			r.refuse(cl.ID, pk.Connect.Username, pk.Connect.WillTopic, "connect", "last will refused: "+r.why(id, true))
			return false
		}
	}
	return true
}

// OnACLCheck applies the per-role publish and subscribe rules. mochi calls
// it for every publish and for every delivery, so the allowed path does not
// allocate.
func (r *rules) OnACLCheck(cl *mochi.Client, topic string, write bool) bool {
	id := r.identify(cl.ID, cl.Properties.Username)
	if r.may(id, topic, write) {
		return true
	}
	action := "subscribe"
	if write {
		action = "publish"
	}
	r.refuse(cl.ID, cl.Properties.Username, topic, action, r.why(id, write))
	return false
}

// identify maps a client to its role and rig: by account when accounts are
// configured, by client id ("rig.<rig>", "firmware.<rig>") otherwise.
func (r *rules) identify(clientID string, user []byte) identity {
	if len(r.accounts) > 0 {
		a := r.accounts[string(user)]
		return identity{role: a.Role, rig: a.Rig}
	}
	if role, rig, ok := topics.ParseClientID(clientID); ok && role != RoleMonitor {
		return identity{role: role, rig: rig}
	}
	return identity{role: RoleMonitor}
}

func leaves(id identity, write bool) []topics.Leaf {
	if write {
		return id.role.Publishes()
	}
	return id.role.Subscribes()
}

// may reports whether id may publish to (write) or subscribe to topic. A
// monitor may subscribe to anything and publish nothing; rig and firmware
// clients only to exact topics of their own rig.
func (r *rules) may(id identity, topic string, write bool) bool {
	if id.role == RoleMonitor {
		return !write
	}
	rest, ok := strings.CutPrefix(topic, r.root)
	if ok {
		rest, ok = strings.CutPrefix(rest, "/")
	}
	if ok {
		rest, ok = strings.CutPrefix(rest, id.rig)
	}
	if ok {
		rest, ok = strings.CutPrefix(rest, "/")
	}
	if !ok {
		return false
	}
	for _, leaf := range leaves(id, write) {
		if rest == string(leaf) {
			return true
		}
	}
	return false
}

// why explains a refusal to a person.
func (r *rules) why(id identity, write bool) string {
	verb := "subscribe"
	if write {
		verb = "publish"
	}
	if id.role == RoleMonitor {
		return "a monitor client may not publish"
	}
	var names []string
	for _, leaf := range leaves(id, write) {
		names = append(names, topics.Topic(r.root, id.rig, leaf))
	}
	return fmt.Sprintf("the %s of rig %q may %s only to %s", id.role, id.rig, verb, strings.Join(names, ", "))
}

func (r *rules) refuse(clientID string, username []byte, topic, action, why string) {
	user := string(username)
	r.refused.Add(1)
	r.log.Warn("broker refused "+action, "client", clientID, "username", user, "topic", topic, "reason", why)
	if r.onRefusal != nil {
		r.onRefusal(Refusal{ClientID: clientID, Username: user, Topic: topic, Action: action, Reason: why})
	}
}

// compile-time check that rules is a complete mochi hook.
var _ mochi.Hook = (*rules)(nil)
