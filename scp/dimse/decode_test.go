package dimse

import (
	"errors"
	"reflect"
	"strings"
	"testing"
)

// sampleCommands is one valid command of each shape the package encodes.
func sampleCommands() map[string]*Command {
	store := NewCStoreRQ(7, mrImageStorage, testInstance, PriorityHigh)
	moveSub := NewCStoreRQ(8, mrImageStorage, testInstance, PriorityLow)
	moveSub.MoveOriginatorAETitle = "OSTMIRE_QR1"
	moveSub.MoveOriginatorMessageID = 77
	failed := store.Response(StatusCannotUnderstand, "bad b-value tag")
	failed.OffendingElements = []uint32{0x00189087, 0x7FE00010}
	failed.ErrorID = 0xBEEF
	return map[string]*Command{
		"a C-ECHO-RQ":                     NewCEchoRQ(1),
		"a C-ECHO-RSP":                    NewCEchoRQ(1).Response(StatusSuccess, ""),
		"a C-STORE-RQ":                    store,
		"a C-STORE-RQ from a C-MOVE":      moveSub,
		"a C-STORE-RSP":                   store.Response(StatusSuccess, ""),
		"a C-STORE-RSP with a comment":    store.Response(StatusOutOfResources, "spool full"),
		"a C-STORE-RSP with every field":  failed,
		"a C-CANCEL-RQ":                   {CommandField: CCancelRQ, MessageIDBeingRespondedTo: 5, CommandDataSetType: NoDataSet},
		"a C-MOVE-RQ":                     {CommandField: CMoveRQ, AffectedSOPClassUID: "1.2.840.10008.5.1.4.1.2.2.2", MessageID: 9, MoveDestination: "DWIAUDIT", CommandDataSetType: DataSetPresent},
		"a C-FIND-RSP that is pending":    {CommandField: CFindRSP, AffectedSOPClassUID: "1.2.840.10008.5.1.4.1.2.2.1", MessageIDBeingRespondedTo: 3, CommandDataSetType: DataSetPresent, Status: StatusPending},
		"a message ID of 65535 (maximum)": NewCEchoRQ(0xFFFF),
	}
}

func TestDecodeRoundTripsEveryEncodedCommand(t *testing.T) {
	for name, c := range sampleCommands() {
		t.Run(name+" survives Encode then Decode", func(t *testing.T) {
			got, err := Decode(mustEncode(c))
			if err != nil {
				t.Fatalf("Decode: %v", err)
			}
			if !reflect.DeepEqual(got, c) {
				t.Errorf("round trip\n got %+v\nwant %+v", got, c)
			}
		})
	}
}

func TestDecodeToleratesWhatOtherImplementationsSend(t *testing.T) {
	body := cat(
		el(0x0000, 0x0002, 26, str(mrImageStorage+"\x00")),
		el(0x0000, 0x0003, 4, str("1.2\x00")), // Requested SOP Class UID, not modelled (PS3.7 E.1)
		el(0x0000, 0x0100, 2, us(0x0001)),
		el(0x0000, 0x0110, 2, us(7)),
		el(0x0000, 0x0700, 2, us(0x0002)),
		el(0x0000, 0x0800, 2, us(0x0000)),             // any value but 0101H announces a data set (PS3.7 Table 9.3-1)
		el(0x0000, 0x0850, 2, us(12)),                 // retired ACR-NEMA Number of Matches (go-dicom dicomtag dictionary)
		el(0x0000, 0x1000, 36, str(testInstance+" ")), // space-padded UID: a common mistake
		el(0x0000, 0x1030, 8, str("  PEER \x00")),     // AE with leading and trailing spaces, both non-significant (PS3.5 Table 6.2-1), and a stray NUL pad
		el(0x0000, 0x1031, 2, us(5)),
		el(0x0000, 0x4000, 0, nil), // unknown, empty
	)
	withGL := cat(el(0x0000, 0x0000, 4, ul(uint32(len(body)))), body)
	want := &Command{
		CommandField: CStoreRQ, AffectedSOPClassUID: mrImageStorage, MessageID: 7, Priority: PriorityLow,
		CommandDataSetType: 0, AffectedSOPInstanceUID: testInstance, MoveOriginatorAETitle: "PEER", MoveOriginatorMessageID: 5,
	}

	tests := []struct {
		name string
		in   []byte
	}{
		{"unknown group 0000 elements are skipped and padding trimmed", withGL},
		{"a command set without a group length is accepted", body},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := Decode(tt.in)
			if err != nil {
				t.Fatalf("Decode: %v", err)
			}
			if !reflect.DeepEqual(got, want) {
				t.Errorf("got %+v\nwant %+v", got, want)
			}
			if !got.HasDataSet() {
				t.Errorf("HasDataSet = false for type 0000H") // PS3.7 E.1: only 0101H means no data set
			}
		})
	}
}

func TestDecodeTrimsStringPadding(t *testing.T) {
	rsp := func(comment string) []byte {
		body := cat(
			el(0x0000, 0x0100, 2, us(0x8001)),
			el(0x0000, 0x0120, 2, us(1)),
			el(0x0000, 0x0800, 2, us(0x0101)),
			el(0x0000, 0x0900, 2, us(0xC000)),
			el(0x0000, 0x0902, uint32(len(comment)), str(comment)),
		)
		return cat(el(0x0000, 0x0000, 4, ul(uint32(len(body)))), body)
	}
	tests := []struct {
		name, comment, want string
	}{
		{"a space pad is dropped", "odd ", "odd"},
		{"a NUL pad is dropped", "odd\x00", "odd"},
		{"leading spaces of an LO are kept", "  indented", "  indented"},
		{"an empty value is empty", "", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := Decode(rsp(tt.comment))
			if err != nil {
				t.Fatal(err)
			}
			if c.ErrorComment != tt.want {
				t.Errorf("comment %q, want %q", c.ErrorComment, tt.want)
			}
		})
	}
}

func TestDecodeRejectsMalformedCommandSets(t *testing.T) {
	gl := func(body []byte) []byte { return cat(el(0x0000, 0x0000, 4, ul(uint32(len(body)))), body) }
	field := el(0x0000, 0x0100, 2, us(0x0030))
	dsType := el(0x0000, 0x0800, 2, us(0x0101))

	tests := []struct {
		name string
		in   []byte
		want error
	}{
		{"an empty input has no command field", nil, errMissingElement},
		{"a half element header is truncated", []byte{0, 0, 0, 1}, errTruncated},
		{"a value longer than the input is truncated", cat(el(0x0000, 0x0100, 2, us(0x30))[:8], []byte{0x30}), errTruncated},
		{"an undefined length is truncated, not allocated", cat([]byte{0, 0, 0x02, 0, 0xFF, 0xFF, 0xFF, 0xFF}, []byte("1.2")), errTruncated},
		{"a 4 GiB length is refused before allocating", cat([]byte{0, 0, 0x00, 0x40, 0xFE, 0xFF, 0xFF, 0xFF}), errTruncated},
		{"an element of group 0008 does not belong in a command", gl(cat(field, dsType, el(0x0008, 0x0016, 2, str("12")))), errNotCommandGroup},
		{"a group length too small is a mismatch", cat(el(0x0000, 0x0000, 4, ul(10)), field, dsType), errGroupLength},
		{"a group length too large is a mismatch", cat(el(0x0000, 0x0000, 4, ul(30)), field, dsType), errGroupLength},
		{"a group length of 3 bytes has the wrong size", cat(el(0x0000, 0x0000, 3, []byte{20, 0, 0}), field, dsType), errValueLength},
		{"a US of 4 bytes has the wrong size", gl(cat(el(0x0000, 0x0100, 4, ul(0x30)), dsType)), errValueLength},
		{"an AT of 6 bytes has the wrong size", gl(cat(field, dsType, el(0x0000, 0x0901, 6, []byte{1, 2, 3, 4, 5, 6}))), errValueLength},
		{"elements out of order are refused", gl(cat(dsType, field)), errElementOrder},
		{"a repeated element is refused", gl(cat(field, field, dsType)), errElementOrder},
		{"a missing command field is refused", gl(dsType), errMissingElement},
		{"a missing data set type is refused", gl(field), errMissingElement},
		{"a response without status is refused rather than read as success", gl(cat(el(0x0000, 0x0100, 2, us(0x8030)), el(0x0000, 0x0120, 2, us(1)), dsType)), errMissingElement},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := Decode(tt.in)
			if !errors.Is(err, tt.want) {
				t.Fatalf("Decode = %+v, %v; want %v", c, err, tt.want)
			}
			if !strings.HasPrefix(err.Error(), "dimse: ") {
				t.Errorf("error %q lacks the dimse: prefix", err)
			}
		})
	}
}

func TestDecodeFailsOnEveryTruncation(t *testing.T) {
	for name, c := range sampleCommands() {
		b := mustEncode(c)
		t.Run(name+" cut at any offset is an error", func(t *testing.T) {
			for n := range len(b) {
				got, err := decodeNoPanic(t, b[:n])
				if err == nil {
					t.Fatalf("Decode(first %d of %d bytes) = %+v, want an error", n, len(b), got)
				}
			}
		})
	}
}

func TestDecodeFailsOnTrailingGarbage(t *testing.T) {
	b := append(mustEncode(NewCEchoRQ(1)), 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00)
	if _, err := Decode(b); !errors.Is(err, errGroupLength) && !errors.Is(err, errElementOrder) {
		t.Fatalf("Decode with 8 extra bytes: %v, want a group length or order error", err)
	}
}

func decodeNoPanic(t *testing.T, b []byte) (c *Command, err error) {
	t.Helper()
	defer func() {
		if r := recover(); r != nil {
			t.Fatalf("Decode(% X) panicked: %v", b, r)
		}
	}()
	return Decode(b)
}
