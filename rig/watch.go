package rig

import "gaitrig/hil"

// teeAlarms is link, also feeding watch; either may be nil.
func teeAlarms(link, watch hil.AlarmSink) hil.AlarmSink {
	switch {
	case watch == nil:
		return link
	case link == nil:
		return watch
	}
	return alarmTee{link, watch}
}

// alarmTee publishes each alarm to the link first, then to the watcher;
// the link's error is the one the loop notes.
type alarmTee struct{ link, watch hil.AlarmSink }

// PublishAlarm implements hil.AlarmSink.
func (t alarmTee) PublishAlarm(obj []byte) error {
	err := t.link.PublishAlarm(obj)
	_ = t.watch.PublishAlarm(obj) // the watcher (a page) never fails the run's alarm publishing
	return err
}
