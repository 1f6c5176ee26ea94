package dimse

import (
	"bytes"
	"testing"
)

// FuzzDecode feeds Decode arbitrary bytes. Decode must never panic, and
// whatever it accepts must survive a re-encode: encoding the decoded
// command, decoding that and encoding again gives the same bytes.
func FuzzDecode(f *testing.F) {
	for _, c := range sampleCommands() {
		f.Add(mustEncode(c))
	}
	for _, tt := range dcmtkCases() {
		f.Add(mustEncode(tt.cmd))
	}
	f.Add([]byte{})
	f.Add([]byte{0, 0, 0, 0, 4, 0, 0, 0}) // a group length header without its value

	f.Fuzz(func(t *testing.T, b []byte) {
		c, err := Decode(b)
		if err != nil {
			if c != nil {
				t.Fatalf("Decode returned both %+v and %v", c, err)
			}
			return
		}
		first, err := c.Encode()
		if err != nil {
			return // decodable but not a command we would send, e.g. an unknown command field
		}
		c2, err := Decode(first)
		if err != nil {
			t.Fatalf("Decode(Encode(Decode(b))) failed: %v\nb     % X\nfirst % X", err, b, first)
		}
		second, err := c2.Encode()
		if err != nil {
			t.Fatalf("re-encode failed: %v", err)
		}
		if !bytes.Equal(first, second) {
			t.Fatalf("encoding not stable\nfirst  % X\nsecond % X", first, second)
		}
	})
}
