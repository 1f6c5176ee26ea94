package store

import "fmt"

// maxUIDLength is the longest UID (PS3.5 9.1; VR UI, PS3.5 6.2 Table 6.2-1).
const maxUIDLength = 64

// checkUID reports whether uid may be used as a file or folder name and
// written as a UI value: 1 to 64 characters, digits and dots only, no
// empty component (hence no leading, trailing or doubled dot) (PS3.5 9.1).
// These rules alone make a UID path-safe: it cannot be "." or "..",
// contain a separator, or be empty. Leading zeros in a component, which
// PS3.5 9.1 forbids too, are let through: senders in the field produce
// them and they do no harm here.
func checkUID(what, uid string) error {
	switch {
	case uid == "":
		return fmt.Errorf("%w: empty %s", ErrInvalidUID, what)
	case len(uid) > maxUIDLength:
		return fmt.Errorf("%w: %s of %d characters, limit %d", ErrInvalidUID, what, len(uid), maxUIDLength)
	}
	prevDot := true // a leading dot is an empty first component
	for i := 0; i < len(uid); i++ {
		c := uid[i]
		switch {
		case c == '.':
			if prevDot {
				return fmt.Errorf("%w: %s %q has an empty component", ErrInvalidUID, what, uid)
			}
			prevDot = true
		case c >= '0' && c <= '9':
			prevDot = false
		default:
			return fmt.Errorf("%w: %s %.70q has a character other than digits and dots", ErrInvalidUID, what, uid)
		}
	}
	if prevDot {
		return fmt.Errorf("%w: %s %q ends with a dot", ErrInvalidUID, what, uid)
	}
	return nil
}
