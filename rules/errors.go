package rules

import "errors"

// ErrInvalidConfig is wrapped by every problem Config.Validate reports;
// the message names the field (protocols[1].bvalues, rules.foo, ...).
// It is the only sentinel error of package rules: rules themselves
// return findings, never errors.
var ErrInvalidConfig = errors.New("rules: invalid configuration")
