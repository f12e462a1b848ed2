package broker

import (
	"crypto/subtle"
	"fmt"
	"log/slog"
	"strings"
	"sync/atomic"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/packets"
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
	user := string(pk.Connect.Username)
	if len(r.accounts) > 0 {
		a, ok := r.accounts[user]
		if !ok || subtle.ConstantTimeCompare([]byte(a.Password), pk.Connect.Password) != 1 {
			r.refuse(cl.ID, user, "", "connect", "unknown username or wrong password")
			return false
		}
	}
	if pk.Connect.WillFlag {
		id := r.identify(pk.Connect.ClientIdentifier, user)
		if ok, why := r.mayPublish(id, pk.Connect.WillTopic); !ok {
			r.refuse(cl.ID, user, pk.Connect.WillTopic, "connect", "last will refused: "+why)
			return false
		}
	}
	return true
}

// OnACLCheck applies the per-role publish and subscribe rules.
func (r *rules) OnACLCheck(cl *mochi.Client, topic string, write bool) bool {
	user := string(cl.Properties.Username)
	id := r.identify(cl.ID, user)
	if write {
		ok, why := r.mayPublish(id, topic)
		if !ok {
			r.refuse(cl.ID, user, topic, "publish", why)
		}
		return ok
	}
	ok, why := r.maySubscribe(id, topic)
	if !ok {
		r.refuse(cl.ID, user, topic, "subscribe", why)
	}
	return ok
}

// identify maps a client to its role and rig: by account when accounts are
// configured, by client id ("rig.<rig>", "firmware.<rig>") otherwise.
func (r *rules) identify(clientID, user string) identity {
	if len(r.accounts) > 0 {
		a := r.accounts[user]
		return identity{role: a.Role, rig: a.Rig}
	}
	for _, role := range []Role{RoleRig, RoleFirmware} {
		if rig, ok := strings.CutPrefix(clientID, string(role)+"."); ok && validLevel(rig) == nil {
			return identity{role: role, rig: rig}
		}
	}
	return identity{role: RoleMonitor}
}

func (r *rules) rigTopic(rig, leaf string) string { return r.root + "/" + rig + "/" + leaf }

// allowed lists the exact topics a rig or firmware client may publish to or
// subscribe to.
func (r *rules) allowed(id identity, write bool) []string {
	switch {
	case id.role == RoleRig && write:
		return []string{r.rigTopic(id.rig, "state"), r.rigTopic(id.rig, "alarm"), r.rigTopic(id.rig, "status"), r.rigTopic(id.rig, "stop")}
	case id.role == RoleRig:
		return []string{r.rigTopic(id.rig, "command"), r.rigTopic(id.rig, "stop")}
	case id.role == RoleFirmware && write:
		return []string{r.rigTopic(id.rig, "command"), r.rigTopic(id.rig, "stop")}
	case id.role == RoleFirmware:
		return []string{r.rigTopic(id.rig, "state"), r.rigTopic(id.rig, "stop"), r.rigTopic(id.rig, "status")}
	}
	return nil
}

func (r *rules) mayPublish(id identity, topic string) (bool, string) {
	if id.role == RoleMonitor {
		return false, "a monitor client may not publish"
	}
	list := r.allowed(id, true)
	for _, t := range list {
		if topic == t {
			return true, ""
		}
	}
	return false, fmt.Sprintf("the %s of rig %q may publish only to %s", id.role, id.rig, strings.Join(list, ", "))
}

func (r *rules) maySubscribe(id identity, filter string) (bool, string) {
	if id.role == RoleMonitor {
		return true, ""
	}
	list := r.allowed(id, false)
	for _, t := range list {
		if filter == t {
			return true, ""
		}
	}
	return false, fmt.Sprintf("the %s of rig %q may subscribe only to %s", id.role, id.rig, strings.Join(list, ", "))
}

func (r *rules) refuse(clientID, user, topic, action, why string) {
	r.refused.Add(1)
	r.log.Warn("broker refused "+action, "client", clientID, "username", user, "topic", topic, "reason", why)
	if r.onRefusal != nil {
		r.onRefusal(Refusal{ClientID: clientID, Username: user, Topic: topic, Action: action, Reason: why})
	}
}

// compile-time check that rules is a complete mochi hook.
var _ mochi.Hook = (*rules)(nil)
