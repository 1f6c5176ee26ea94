package dimse

import (
	"errors"
	"fmt"
	"io/fs"
	"strings"
	"testing"
)

func TestTruncateComment(t *testing.T) {
	tests := []struct {
		name, in, want string
	}{
		{"a short comment is unchanged", "spool full", "spool full"},
		{"an empty comment stays empty", "", ""},
		{"a long comment is cut to 64 characters", strings.Repeat("abcdefgh", 10), strings.Repeat("abcdefgh", 8)}, // PS3.5 Table 6.2-1: LO max 64
		{"exactly 64 characters are kept", strings.Repeat("z", 64), strings.Repeat("z", 64)},
		{"newlines and tabs become spaces", "line one\nline\ttwo\r", "line one line two"}, // PS3.5 Table 6.2-1: LO allows no control character but ESC (from memory)
		{"a backslash becomes a slash", `C:\spool\full`, "C:/spool/full"},                 // PS3.5 Table 6.2-1: LO forbids 5CH (from memory)
		{"non-ASCII becomes a question mark", "Zürich voll", "Z?rich voll"},               // PS3.5 6.1.2: default repertoire only
		{"invalid UTF-8 becomes a question mark", "bad\xffbyte", "bad?byte"},
		{"trailing spaces are dropped as padding", "padded   ", "padded"},
		{"a cut that ends in spaces drops them", strings.Repeat("a", 62) + "    tail", strings.Repeat("a", 62)},
		{"multi-byte characters count as one each", strings.Repeat("é", 70), strings.Repeat("?", 64)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := truncateComment(tt.in)
			if got != tt.want {
				t.Errorf("TruncateComment(%q) = %q, want %q", tt.in, got, tt.want)
			}
			if len(got) > MaxCommentLen {
				t.Errorf("length %d > %d", len(got), MaxCommentLen) // PS3.5 Table 6.2-1
			}
			if again := truncateComment(got); again != got {
				t.Errorf("not idempotent: %q then %q", got, again)
			}
		})
	}
}

func TestEncodeTruncatesTheErrorComment(t *testing.T) {
	rsp := NewCStoreRQ(1, mrImageStorage, testInstance, PriorityMedium).Response(StatusProcessingFailure, "")
	rsp.ErrorComment = strings.Repeat("0123456789", 10) // set directly, bypassing Response
	c, err := Decode(mustEncode(rsp))
	if err != nil {
		t.Fatal(err)
	}
	if want := strings.Repeat("0123456789", 7)[:64]; c.ErrorComment != want {
		t.Errorf("wire comment %q, want the first 64 characters", c.ErrorComment) // PS3.5 Table 6.2-1: LO max 64
	}
}

func TestStatusOf(t *testing.T) {
	full := NewStatusError(StatusOutOfResources, "spool volume full", fs.ErrExist)
	long := errors.New(strings.Repeat("x", 80) + "\nsecond line")
	tests := []struct {
		name        string
		err         error
		wantStatus  Status
		wantComment string
	}{
		{"nil is success without a comment", nil, StatusSuccess, ""},
		{"a StatusError gives its own status and comment", full, StatusOutOfResources, "spool volume full"},
		{"a wrapped StatusError is found through the chain", fmt.Errorf("store %d: %w", 3, full), StatusOutOfResources, "spool volume full"},
		{"a warning StatusError is passed on as a warning", NewStatusError(StatusCoercionOfDataElements, "", nil), StatusCoercionOfDataElements, ""},
		{"a plain error is a processing failure with its text", errors.New("write spool: no space left"), StatusProcessingFailure, "write spool: no space left"}, // PS3.7 C.5: 0110H processing failure
		{"a plain error's long text is cut to 64 characters", long, StatusProcessingFailure, strings.Repeat("x", 64)},                                            // PS3.5 Table 6.2-1
		{"a StatusError's long comment is cut too", NewStatusError(StatusCannotUnderstand, strings.Repeat("y", 99), nil), StatusCannotUnderstand, strings.Repeat("y", 64)},
		{"a typed nil StatusError is a processing failure, not a panic", error((*StatusError)(nil)), StatusProcessingFailure, "<nil>"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, c := StatusOf(tt.err)
			if s != tt.wantStatus || c != tt.wantComment {
				t.Errorf("StatusOf = %v, %q; want %v, %q", s, c, tt.wantStatus, tt.wantComment)
			}
		})
	}
}

func TestStatusError(t *testing.T) {
	cause := fs.ErrPermission
	tests := []struct {
		name    string
		err     *StatusError
		wantMsg string
		wantIs  error
	}{
		{"the message names status and comment", NewStatusError(StatusOutOfResources, "spool full", nil),
			"dimse: status 0xA700 (out of resources): spool full", nil},
		{"the cause follows the comment and unwraps", NewStatusError(StatusOutOfResources, "spool full", cause),
			"dimse: status 0xA700 (out of resources): spool full: permission denied", cause},
		{"without a comment the status stands alone", NewStatusError(StatusSOPClassNotSupported, "", nil),
			"dimse: status 0x0122 (SOP class not supported)", nil},
		{"Errorf formats the comment and keeps a %w cause", Errorf(StatusCannotUnderstand, "parse: %w", cause),
			"dimse: status 0xC000 (cannot understand): parse: permission denied", cause},
		{"Errorf without %w has no cause", Errorf(StatusOutOfResources, "%d bytes free", 0),
			"dimse: status 0xA700 (out of resources): 0 bytes free", nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := tt.err.Error(); got != tt.wantMsg {
				t.Errorf("Error() = %q, want %q", got, tt.wantMsg)
			}
			if tt.wantIs != nil && !errors.Is(tt.err, tt.wantIs) {
				t.Errorf("errors.Is(%v) = false", tt.wantIs)
			}
			if tt.wantIs == nil && tt.err.Unwrap() != nil {
				t.Errorf("Unwrap() = %v, want nil", tt.err.Unwrap())
			}
		})
	}
}
