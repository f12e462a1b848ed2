package conformance

import (
	"gaitrig/bridges"
	"gaitrig/rig"
)

// LinkDialer returns a Dialer for a link in --link syntax, dialled through
// rig's registry of link kinds. rigID is the MQTT rig id ("" for "bench").
// Kinds that start the built-in firmware with the link (builtin, pty,
// embedded) start a fresh one with every dial, as a board powered up anew;
// serial: and mqtt: reach a firmware someone else runs, which must greet
// again by itself when the battery opens the link a second time.
func LinkDialer(link, rigID string) (Dialer, error) {
	l, err := rig.ParseLink(link)
	if err != nil {
		return nil, err
	}
	return func() (bridges.Conn, func(), error) {
		// Lockstep false keeps an in-process firmware on its own goroutine,
		// so its round trip is a hand-over between threads, as on a wire.
		o, err := rig.Dial(rig.DialSetup{Link: l, Rig: rigID})
		if err != nil {
			return nil, nil, err
		}
		return o.Conn, o.Close, nil
	}, nil
}
