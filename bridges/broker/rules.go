package broker

import (
	"crypto/subtle"
	"errors"
	"fmt"
	"os"
	"strings"
	"sync"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/packets"

	"gaitrig/bridges/topics"
)

// rules is the mochi hook that logs clients in, binds client ids to roles
// and rigs, and applies the access rules described in the package comment.
type rules struct {
	mochi.HookBase
	server   *mochi.Server // to answer a refused CONNECT with our own reason code
	root     string
	accounts map[string]Account // empty: anonymous, identity from client id
	limits   Limits
	refusals *refusalLog

	mu       sync.Mutex
	claims   map[string]claim // client id → the connection holding it
	sweepLen int              // len(claims) at which closed claims are swept out

	retained *retainedCap // bounds the retained messages (retained.go)
}

// claim records which connection holds a client id, and under which
// account, so that a second connection cannot take its session over.
type claim struct {
	cl   *mochi.Client
	user string
}

// identity is who a client is for the access rules.
type identity struct {
	role Role
	rig  string
}

func (r *rules) ID() string { return "gaitrig-access-rules" }

func (r *rules) Provides(b byte) bool {
	switch b {
	case mochi.OnConnect, mochi.OnConnectAuthenticate, mochi.OnACLCheck, mochi.OnDisconnect, mochi.OnPublish, mochi.OnWill:
		return true
	}
	return false
}

// OnConnect decides whether a client may connect: its login (with
// accounts), its client id, its last will and whether the id is already in
// use. It runs before OnConnectAuthenticate so that a refusal can carry a
// reason code that says what was wrong (mochi's authentication hook can
// only answer "bad username or password"); the error it returns makes mochi
// close the connection after our CONNACK.
func (r *rules) OnConnect(cl *mochi.Client, pk packets.Packet) error {
	hc, _ := cl.Net.Conn.(*handoverConn)
	if hc != nil {
		hc.clientID.Store(&cl.ID)
	}
	user := string(pk.Connect.Username)
	ref := Refusal{ClientID: cl.ID, Username: user, Remote: cl.Net.Remote}
	var id identity
	if len(r.accounts) > 0 {
		a, ok := r.accounts[user]
		if !ok || subtle.ConstantTimeCompare([]byte(a.Password), pk.Connect.Password) != 1 {
			return r.refuseConnect(cl, hc, ref, RefusedLogin, "unknown username or wrong password")
		}
		id = identity{role: a.Role, rig: a.Rig}
		if why := accountMayUse(a, cl.ID); why != "" {
			return r.refuseConnect(cl, hc, ref, RefusedClientID, why)
		}
	} else {
		role, rig, ok := topics.ParseClientID(cl.ID)
		if !ok {
			return r.refuseConnect(cl, hc, ref, RefusedClientID, fmt.Sprintf(
				"client id %q is not one of ours: use %q for the firmware of rig <rig>, %q for the rig, %q for a read-only observer",
				cl.ID, topics.ClientID(RoleFirmware, "<rig>"), topics.ClientID(RoleRig, "<rig>"), "monitor.<name>"))
		}
		id = identity{role: role, rig: rig}
	}
	if pk.Connect.WillFlag && !r.may(id, pk.Connect.WillTopic, true) {
		ref.Topic = pk.Connect.WillTopic
		return r.refuseConnect(cl, hc, ref, RefusedWill, "last will refused: "+r.why(id, true))
	}
	if why := r.claim(cl, user); why != "" {
		return r.refuseConnect(cl, hc, ref, RefusedTakeover, why)
	}
	if hc != nil {
		hc.accepted.Store(true)
	}
	return nil
}

// OnConnectAuthenticate lets through every client OnConnect accepted (mochi
// refuses a client when no hook authenticates it).
func (r *rules) OnConnectAuthenticate(*mochi.Client, packets.Packet) bool { return true }

// OnDisconnect releases the client's id.
func (r *rules) OnDisconnect(cl *mochi.Client, _ error, _ bool) {
	r.mu.Lock()
	if c, ok := r.claims[cl.ID]; ok && c.cl == cl {
		delete(r.claims, cl.ID)
	}
	r.mu.Unlock()
}

// accountMayUse says why an account may not connect with a client id, or
// "" when it may. The account's Role and Rig decide what the client may do,
// so a client id of one of our forms must agree with them: a firmware
// account may not pass itself off as the rig, nor a monitor as either.
func accountMayUse(a Account, id string) string {
	if len(a.ClientIDs) > 0 {
		for _, ok := range a.ClientIDs {
			if id == ok {
				return ""
			}
		}
		return fmt.Sprintf("account %q may connect only as %s, not as %q", a.Username, strings.Join(quoted(a.ClientIDs), ", "), id)
	}
	role, rig, ours := topics.ParseClientID(id)
	if !ours || (role == a.Role && (role == RoleMonitor || rig == a.Rig)) {
		return ""
	}
	own := "a monitor"
	if a.Role != RoleMonitor {
		own = fmt.Sprintf("the %s of rig %q", a.Role, a.Rig)
	}
	return fmt.Sprintf("account %q is %s; client id %q belongs to another role or rig", a.Username, own, id)
}

func quoted(s []string) []string {
	q := make([]string, len(s))
	for i, v := range s {
		q[i] = fmt.Sprintf("%q", v)
	}
	return q
}

// claim takes the client id for cl, or says why it may not: the id is held
// by a live connection. With accounts, the same account may take its own
// id back (a client reconnecting before the broker noticed the old
// connection died); without accounts nobody may, since anyone on the host
// could present any id.
func (r *rules) claim(cl *mochi.Client, user string) string {
	r.mu.Lock()
	defer r.mu.Unlock()
	if old, ok := r.claims[cl.ID]; ok && !old.cl.Closed() {
		if len(r.accounts) == 0 || old.user != user {
			return fmt.Sprintf("client id %q is already connected (from %s); a second connection may not take over its session", cl.ID, old.cl.Net.Remote)
		}
	}
	// A connection that failed between OnConnect and its session never
	// reaches OnDisconnect; sweep such claims out so the map stays bounded.
	if len(r.claims) >= r.sweepLen {
		for id, c := range r.claims {
			if c.cl.Closed() {
				delete(r.claims, id)
			}
		}
		r.sweepLen = max(2*len(r.claims), 2*r.limits.MaxClients)
	}
	r.claims[cl.ID] = claim{cl: cl, user: user}
	return ""
}

// refuseConnect answers the CONNECT with the reason code of kind (in the
// client's protocol version), reports the refusal and returns the error
// that makes mochi drop the connection.
func (r *rules) refuseConnect(cl *mochi.Client, hc *handoverConn, ref Refusal, kind RefusalKind, why string) error {
	if hc != nil {
		hc.reported.Store(true)
	}
	ref.Kind, ref.Reason = kind, why
	r.refusals.report(ref)
	code := connackCode(kind, cl.Properties.ProtocolVersion, why)
	_ = r.server.SendConnack(cl, code, false, nil) // the client may be gone already
	return code
}

// connackCode picks the CONNACK reason code for a refusal. MQTT 3.1.1 has
// only a few return codes (mochi maps the MQTT 5 code to them); an MQTT 5
// client also gets our sentence as the reason string.
func connackCode(kind RefusalKind, version byte, why string) packets.Code {
	var code packets.Code
	switch kind {
	case RefusedClientID, RefusedTakeover:
		code = packets.ErrClientIdentifierNotValid // 3.1.1: 0x02 identifier rejected
	case RefusedWill:
		code = packets.ErrNotAuthorized
		if version < 5 {
			code = packets.ErrBadUsernameOrPassword // 3.1.1: 0x05 not authorized
		}
	default:
		code = packets.ErrBadUsernameOrPassword // 3.1.1: 0x05 not authorized
	}
	if version == 5 {
		code.Reason = why
	}
	return code
}

// OnACLCheck applies the per-role publish and subscribe rules. mochi calls
// it for every publish and for every delivery, so the allowed path does not
// allocate.
func (r *rules) OnACLCheck(cl *mochi.Client, topic string, write bool) bool {
	id := r.identify(cl.ID, cl.Properties.Username)
	if r.may(id, topic, write) {
		return true
	}
	kind := RefusedSubscribe
	if write {
		kind = RefusedPublish
	}
	r.refusals.report(Refusal{Kind: kind, ClientID: cl.ID, Username: string(cl.Properties.Username),
		Remote: cl.Net.Remote, Topic: topic, Reason: r.why(id, write)})
	return false
}

// connectionEnded reports a connection that mochi dropped for a reason the
// rules did not see: a packet over the size limit, too many clients, too
// many unacknowledged messages, or garbage instead of a CONNECT. A client
// that merely hung up is not a refusal.
func (r *rules) connectionEnded(hc *handoverConn, err error) {
	if hc.reported.Load() {
		return
	}
	ref := Refusal{Remote: hc.RemoteAddr().String()}
	if id := hc.clientID.Load(); id != nil {
		ref.ClientID = *id
	}
	var code packets.Code
	switch {
	case !hc.accepted.Load() && errors.Is(err, os.ErrDeadlineExceeded):
		ref.Kind, ref.Reason = RefusedMalformed, fmt.Sprintf("no CONNECT within %v; connection closed", r.limits.ConnectWait)
	case !errors.As(err, &code):
		return // the client hung up or the line broke
	case code == packets.ErrPacketTooLarge:
		ref.Kind, ref.Reason = RefusedOversized, fmt.Sprintf("a packet announced more than the %d-byte limit; connection closed", r.limits.MaxPacketBytes)
	case code == packets.ErrServerBusy:
		ref.Kind, ref.Reason = RefusedBusy, fmt.Sprintf("the broker already serves its limit of %d clients", r.limits.MaxClients)
	case code == packets.ErrReceiveMaximum || code == packets.ErrQuotaExceeded:
		ref.Kind, ref.Reason = RefusedQuota, fmt.Sprintf("more than %d QoS 1/2 messages sent without waiting for acknowledgements; connection closed", r.limits.ReceiveMaximum)
	case !hc.accepted.Load() && code.Code >= packets.ErrUnspecifiedError.Code:
		ref.Kind, ref.Reason = RefusedMalformed, "the connection did not start with a valid CONNECT: "+code.Reason
	default:
		return
	}
	r.refusals.report(ref)
}

// identify maps a connected client to its role and rig: by account when
// accounts are configured, by client id otherwise (OnConnect has refused
// every other id).
func (r *rules) identify(clientID string, user []byte) identity {
	if len(r.accounts) > 0 {
		a := r.accounts[string(user)]
		return identity{role: a.Role, rig: a.Rig}
	}
	if role, rig, ok := topics.ParseClientID(clientID); ok {
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

// compile-time check that rules is a complete mochi hook.
var _ mochi.Hook = (*rules)(nil)
