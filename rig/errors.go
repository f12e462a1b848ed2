package rig

import (
	"errors"
	"fmt"
)

// ErrConfig is wrapped by every error that is the user's configuration: a
// scenario that does not build, a --link that does not parse, a link that
// cannot be opened, a run folder that cannot be created. The command line
// exits with code 2 for these and 1 for everything else, so a nightly rig
// can tell "fix the setup" from "the firmware failed".
var ErrConfig = errors.New("configuration error")

// configError marks err as a configuration error without changing its text.
type configError struct{ err error }

func (e configError) Error() string   { return e.err.Error() }
func (e configError) Unwrap() []error { return []error{ErrConfig, e.err} }

// ConfigError marks err as the user's configuration (errors.Is(err,
// ErrConfig) holds) and keeps its text and its chain; nil stays nil.
func ConfigError(err error) error {
	if err == nil || errors.Is(err, ErrConfig) {
		return err
	}
	return configError{err}
}

// Configf formats a configuration error (see ConfigError).
func Configf(format string, a ...any) error { return configError{fmt.Errorf(format, a...)} }

// ErrLinkOpen is wrapped (besides ErrConfig) by the error of a link that
// could not be opened: a nightly rig retries such a run as the host's
// trouble (a busy broker, a port another job holds) instead of blaming the
// firmware build.
var ErrLinkOpen = errors.New("link could not be opened")

// linkOpenError marks err as a link that could not be opened, keeping its
// text; nil stays nil.
func linkOpenError(err error) error {
	if err == nil {
		return nil
	}
	return configError{linkOpen{err}}
}

// linkOpen wraps the dial error so errors.Is finds ErrLinkOpen and the
// cause, with the cause's text unchanged.
type linkOpen struct{ err error }

func (e linkOpen) Error() string   { return e.err.Error() }
func (e linkOpen) Unwrap() []error { return []error{ErrLinkOpen, e.err} }
