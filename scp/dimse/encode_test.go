package dimse

import (
	"bytes"
	"encoding/binary"
	"errors"
	"strings"
	"testing"
)

func TestEncodeMatchesTheMessageTablesByteForByte(t *testing.T) {
	echoRQ := NewCEchoRQ(1)
	storeRQ := NewCStoreRQ(7, mrImageStorage, testInstance, PriorityMedium)
	moveSubRQ := NewCStoreRQ(7, mrImageStorage, testInstance, PriorityHigh)
	moveSubRQ.MoveOriginatorAETitle = "OSTMIRE_QR1" // 11 chars: odd, needs a space pad
	moveSubRQ.MoveOriginatorMessageID = 3

	tests := []struct {
		name string
		cmd  *Command
		want []byte
	}{
		{
			name: "C-ECHO-RQ encodes exactly as PS3.7 Table 9.3-12",
			cmd:  echoRQ,
			want: cat(
				el(0x0000, 0x0000, 4, ul(56)),                        // Command Group Length: 56 bytes follow (PS3.7 Table 9.3-12)
				el(0x0000, 0x0002, 18, str("1.2.840.10008.1.1\x00")), // Affected SOP Class UID = Verification, NUL pad to even (PS3.7 Table 9.3-12, PS3.5 6.2)
				el(0x0000, 0x0100, 2, us(0x0030)),                    // Command Field = 0030H (PS3.7 Table 9.3-12)
				el(0x0000, 0x0110, 2, us(1)),                         // Message ID (PS3.7 Table 9.3-12)
				el(0x0000, 0x0800, 2, us(0x0101)),                    // Command Data Set Type = 0101H, no data set (PS3.7 Table 9.3-12)
			),
		},
		{
			name: "C-ECHO-RSP encodes exactly as PS3.7 Table 9.3-13",
			cmd:  echoRQ.Response(StatusSuccess, ""),
			want: cat(
				el(0x0000, 0x0000, 4, ul(66)),                        // Command Group Length: 66 bytes follow (PS3.7 Table 9.3-13)
				el(0x0000, 0x0002, 18, str("1.2.840.10008.1.1\x00")), // Affected SOP Class UID (PS3.7 Table 9.3-13)
				el(0x0000, 0x0100, 2, us(0x8030)),                    // Command Field = 8030H (PS3.7 Table 9.3-13)
				el(0x0000, 0x0120, 2, us(1)),                         // Message ID Being Responded To = request's Message ID (PS3.7 Table 9.3-13)
				el(0x0000, 0x0800, 2, us(0x0101)),                    // Command Data Set Type = 0101H (PS3.7 Table 9.3-13)
				el(0x0000, 0x0900, 2, us(0x0000)),                    // Status = Success (PS3.7 Table 9.3-13, C.1.1)
			),
		},
		{
			name: "C-STORE-RQ encodes exactly as PS3.7 Table 9.3-1",
			cmd:  storeRQ,
			want: cat(
				el(0x0000, 0x0000, 4, ul(118)),                     // Command Group Length: 118 bytes follow (PS3.7 Table 9.3-1)
				el(0x0000, 0x0002, 26, str(mrImageStorage+"\x00")), // Affected SOP Class UID, NUL pad (PS3.7 Table 9.3-1, PS3.5 6.2)
				el(0x0000, 0x0100, 2, us(0x0001)),                  // Command Field = 0001H (PS3.7 Table 9.3-1)
				el(0x0000, 0x0110, 2, us(7)),                       // Message ID (PS3.7 Table 9.3-1)
				el(0x0000, 0x0700, 2, us(0x0000)),                  // Priority = MEDIUM 0000H (PS3.7 Table 9.3-1)
				el(0x0000, 0x0800, 2, us(0x0001)),                  // Command Data Set Type: not 0101H, a data set follows (PS3.7 Table 9.3-1)
				el(0x0000, 0x1000, 36, str(testInstance+"\x00")),   // Affected SOP Instance UID, NUL pad (PS3.7 Table 9.3-1)
			),
		},
		{
			name: "C-STORE-RQ for a C-MOVE sub-operation adds the move originator as in PS3.7 Table 9.3-1",
			cmd:  moveSubRQ,
			want: cat(
				el(0x0000, 0x0000, 4, ul(148)),                     // Command Group Length: 148 bytes follow (PS3.7 Table 9.3-1)
				el(0x0000, 0x0002, 26, str(mrImageStorage+"\x00")), // Affected SOP Class UID (PS3.7 Table 9.3-1)
				el(0x0000, 0x0100, 2, us(0x0001)),                  // Command Field = 0001H (PS3.7 Table 9.3-1)
				el(0x0000, 0x0110, 2, us(7)),                       // Message ID (PS3.7 Table 9.3-1)
				el(0x0000, 0x0700, 2, us(0x0001)),                  // Priority = HIGH 0001H (PS3.7 Table 9.3-1)
				el(0x0000, 0x0800, 2, us(0x0001)),                  // Command Data Set Type (PS3.7 Table 9.3-1)
				el(0x0000, 0x1000, 36, str(testInstance+"\x00")),   // Affected SOP Instance UID (PS3.7 Table 9.3-1)
				el(0x0000, 0x1030, 12, str("OSTMIRE_QR1 ")),        // Move Originator AE Title, space pad (PS3.7 Table 9.3-1, PS3.5 6.2)
				el(0x0000, 0x1031, 2, us(3)),                       // Move Originator Message ID (PS3.7 Table 9.3-1)
			),
		},
		{
			name: "C-STORE-RSP success encodes exactly as PS3.7 Table 9.3-2",
			cmd:  storeRQ.Response(StatusSuccess, ""),
			want: cat(
				el(0x0000, 0x0000, 4, ul(118)),                     // Command Group Length: 118 bytes follow (PS3.7 Table 9.3-2)
				el(0x0000, 0x0002, 26, str(mrImageStorage+"\x00")), // Affected SOP Class UID, same as the request (PS3.7 Table 9.3-2)
				el(0x0000, 0x0100, 2, us(0x8001)),                  // Command Field = 8001H (PS3.7 Table 9.3-2)
				el(0x0000, 0x0120, 2, us(7)),                       // Message ID Being Responded To (PS3.7 Table 9.3-2)
				el(0x0000, 0x0800, 2, us(0x0101)),                  // Command Data Set Type = 0101H (PS3.7 Table 9.3-2)
				el(0x0000, 0x0900, 2, us(0x0000)),                  // Status = Success (PS3.7 Table 9.3-2, PS3.4 Table B.2-1)
				el(0x0000, 0x1000, 36, str(testInstance+"\x00")),   // Affected SOP Instance UID, same as the request (PS3.7 Table 9.3-2)
			),
		},
		{
			name: "C-STORE-RSP out of resources carries the error comment as in PS3.7 C.5 and PS3.4 Table B.2-1",
			cmd:  storeRQ.Response(StatusOutOfResources, "disk quota reached on spool"), // 27 chars: odd
			want: cat(
				el(0x0000, 0x0000, 4, ul(154)),                              // Command Group Length: 154 bytes follow (PS3.7 Table 9.3-2)
				el(0x0000, 0x0002, 26, str(mrImageStorage+"\x00")),          // Affected SOP Class UID (PS3.7 Table 9.3-2)
				el(0x0000, 0x0100, 2, us(0x8001)),                           // Command Field = 8001H (PS3.7 Table 9.3-2)
				el(0x0000, 0x0120, 2, us(7)),                                // Message ID Being Responded To (PS3.7 Table 9.3-2)
				el(0x0000, 0x0800, 2, us(0x0101)),                           // Command Data Set Type = 0101H (PS3.7 Table 9.3-2)
				el(0x0000, 0x0900, 2, us(0xA700)),                           // Status = Refused: Out of Resources A7xx (PS3.4 Table B.2-1)
				el(0x0000, 0x0902, 28, str("disk quota reached on spool ")), // Error Comment LO, space pad; related field of A7xx (PS3.4 Table B.2-1, PS3.7 C.5, PS3.5 6.2)
				el(0x0000, 0x1000, 36, str(testInstance+"\x00")),            // Affected SOP Instance UID (PS3.7 Table 9.3-2)
			),
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := tt.cmd.Encode()
			if err != nil {
				t.Fatalf("Encode: %v", err)
			}
			if !bytes.Equal(got, tt.want) {
				t.Fatalf("Encode mismatch\n got % X\nwant % X", got, tt.want)
			}
		})
	}
}

// TestEncodeStructure checks, with an independent walker, the three rules
// every command set obeys whatever its command: the group length comes
// first and counts the bytes after it, tags ascend, values are even.
func TestEncodeStructure(t *testing.T) {
	store := NewCStoreRQ(65535, mrImageStorage, testInstance, PriorityLow)
	failed := store.Response(StatusCannotUnderstand, "pixel data shorter than rows x columns")
	failed.OffendingElements = []uint32{0x7FE00010, 0x00280010}
	failed.ErrorID = 42
	find := &Command{CommandField: CFindRQ, AffectedSOPClassUID: "1.2.840.10008.5.1.4.1.2.2.1", MessageID: 3, Priority: PriorityMedium, CommandDataSetType: DataSetPresent}
	move := &Command{CommandField: CMoveRQ, AffectedSOPClassUID: "1.2.840.10008.5.1.4.1.2.2.2", MessageID: 4, MoveDestination: "DWIAUDIT", CommandDataSetType: DataSetPresent}
	cancel := &Command{CommandField: CCancelRQ, MessageIDBeingRespondedTo: 3, CommandDataSetType: NoDataSet}

	tests := []struct {
		name     string
		cmd      *Command
		wantTags []uint32
	}{
		{"a C-ECHO-RQ has no Priority", NewCEchoRQ(1),
			[]uint32{0x00000000, 0x00000002, 0x00000100, 0x00000110, 0x00000800}}, // PS3.7 Table 9.3-12
		{"a C-STORE-RQ has Priority and both UIDs", store,
			[]uint32{0x00000000, 0x00000002, 0x00000100, 0x00000110, 0x00000700, 0x00000800, 0x00001000}}, // PS3.7 Table 9.3-1
		{"a failed C-STORE-RSP carries offending elements, comment and error ID between Status and the instance UID", failed,
			[]uint32{0x00000000, 0x00000002, 0x00000100, 0x00000120, 0x00000800, 0x00000900, 0x00000901, 0x00000902, 0x00000903, 0x00001000}}, // PS3.7 Table 9.3-2 and C.5; PS3.4 Table B.2-1 (Cxxx related fields)
		{"a C-FIND-RQ has Priority", find,
			[]uint32{0x00000000, 0x00000002, 0x00000100, 0x00000110, 0x00000700, 0x00000800}}, // PS3.7 9.3.2.1 (from memory)
		{"a C-MOVE-RQ has Move Destination before Priority", move,
			[]uint32{0x00000000, 0x00000002, 0x00000100, 0x00000110, 0x00000600, 0x00000700, 0x00000800}}, // PS3.7 9.3.4.1 (from memory)
		{"a C-CANCEL-RQ names the cancelled request instead of a Message ID", cancel,
			[]uint32{0x00000000, 0x00000100, 0x00000120, 0x00000800}}, // PS3.7 Table 9.3-5
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b, err := tt.cmd.Encode()
			if err != nil {
				t.Fatalf("Encode: %v", err)
			}
			els, err := walk(b)
			if err != nil {
				t.Fatalf("walk: %v", err)
			}
			var tags []uint32
			for i, e := range els {
				tags = append(tags, e.tag)
				if len(e.value)%2 != 0 {
					t.Errorf("(%04X,%04X) has odd length %d", e.tag>>16, e.tag&0xFFFF, len(e.value)) // PS3.5 7.1.1: even value lengths
				}
				if i > 0 && e.tag <= els[i-1].tag {
					t.Errorf("(%04X,%04X) follows (%04X,%04X)", e.tag>>16, e.tag&0xFFFF, els[i-1].tag>>16, els[i-1].tag&0xFFFF) // PS3.5 7.1: ascending tags
				}
			}
			if got, want := binary.LittleEndian.Uint32(els[0].value), uint32(len(b)-12); got != want {
				t.Errorf("group length %d, %d bytes follow it", got, want) // PS3.7 E.1: group length counts the bytes after its value
			}
			if !equalTags(tags, tt.wantTags) {
				t.Errorf("tags %08X, want %08X", tags, tt.wantTags)
			}
		})
	}
}

func equalTags(a, b []uint32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func TestEncodeLeavesOutFieldsThatDoNotBelongToTheCommand(t *testing.T) {
	rq := NewCStoreRQ(9, mrImageStorage, testInstance, PriorityHigh)
	rq.Status = StatusOutOfResources // not a request field (PS3.7 Table 9.3-1)
	rq.ErrorComment = "ignored"
	rsp := rq.Response(StatusSuccess, "")
	rsp.MessageID = 99                 // not a response field (PS3.7 Table 9.3-2)
	rsp.Priority = PriorityHigh        // not a response field (PS3.7 Table 9.3-2)
	rsp.MoveOriginatorAETitle = "PEER" // not a response field (PS3.7 Table 9.3-2)
	echo := NewCEchoRQ(2)
	echo.Priority = PriorityLow // C-ECHO-RQ has no Priority (PS3.7 Table 9.3-12)

	tests := []struct {
		name   string
		cmd    *Command
		absent []uint32
	}{
		{"a request never carries Status or an error comment", rq, []uint32{0x00000900, 0x00000902}},
		{"a response never carries Message ID, Priority or the move originator", rsp, []uint32{0x00000110, 0x00000700, 0x00001030, 0x00001031}},
		{"a C-ECHO-RQ never carries Priority", echo, []uint32{0x00000700}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			els, err := walk(mustEncode(tt.cmd))
			if err != nil {
				t.Fatal(err)
			}
			for _, e := range els {
				for _, a := range tt.absent {
					if e.tag == a {
						t.Errorf("(%04X,%04X) encoded", a>>16, a&0xFFFF)
					}
				}
			}
		})
	}
}

func TestEncodeRefusesCommandsThatBreakTheirTable(t *testing.T) {
	noInstance := NewCStoreRQ(1, mrImageStorage, "", PriorityMedium)
	noDataSet := NewCStoreRQ(1, mrImageStorage, testInstance, PriorityMedium)
	noDataSet.CommandDataSetType = NoDataSet
	badPrio := NewCStoreRQ(1, mrImageStorage, testInstance, Priority(3))
	echoWithData := NewCEchoRQ(1)
	echoWithData.CommandDataSetType = DataSetPresent
	echoNoClass := NewCEchoRQ(1)
	echoNoClass.AffectedSOPClassUID = ""
	rspWithData := NewCEchoRQ(1).Response(StatusSuccess, "")
	rspWithData.CommandDataSetType = 0 // the zero value would announce a data set
	longAE := NewCStoreRQ(1, mrImageStorage, testInstance, PriorityMedium)
	longAE.MoveOriginatorAETitle = "QUELLVANDER_QR_NODE" // 19 > 16 (PS3.5 Table 6.2-1)

	tests := []struct {
		name string
		cmd  *Command
	}{
		{"a zero command field is refused", &Command{CommandDataSetType: NoDataSet}},                             // PS3.7 E.1 defines no 0000H
		{"an undefined command field is refused", &Command{CommandField: 0x0042, CommandDataSetType: NoDataSet}}, // PS3.7 E.1
		{"the response to a C-CANCEL-RQ is refused", (&Command{CommandField: CCancelRQ}).Response(StatusSuccess, "")},
		{"a C-STORE-RQ without an instance UID is refused", noInstance},      // PS3.7 Table 9.3-1
		{"a C-STORE-RQ without a data set is refused", noDataSet},            // PS3.7 Table 9.3-1
		{"a C-STORE-RQ with priority 3 is refused", badPrio},                 // PS3.7 Table 9.3-1
		{"a C-ECHO-RQ with a data set is refused", echoWithData},             // PS3.7 Table 9.3-12
		{"a C-ECHO-RQ without a SOP class is refused", echoNoClass},          // PS3.7 Table 9.3-12
		{"a C-ECHO-RSP announcing a data set is refused", rspWithData},       // PS3.7 Table 9.3-13
		{"a move originator AE title over 16 characters is refused", longAE}, // PS3.5 Table 6.2-1
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b, err := tt.cmd.Encode()
			if !errors.Is(err, errInvalidCommand) {
				t.Fatalf("Encode = % X, %v; want ErrInvalidCommand", b, err)
			}
			if !strings.HasPrefix(err.Error(), "dimse: ") {
				t.Errorf("error %q lacks the dimse: prefix", err)
			}
		})
	}
}

func TestResponseCopiesTheRequest(t *testing.T) {
	rq := NewCStoreRQ(4242, mrImageStorage, testInstance, PriorityLow)
	rsp := rq.Response(StatusCoercionOfDataElements, strings.Repeat("x", 100))
	checks := []struct {
		name      string
		got, want any
	}{
		{"the command field gains the response bit", rsp.CommandField, CStoreRSP},                    // PS3.7 E.1
		{"the message ID becomes the one responded to", rsp.MessageIDBeingRespondedTo, uint16(4242)}, // PS3.7 Table 9.3-2
		{"the SOP class is copied", rsp.AffectedSOPClassUID, mrImageStorage},                         // PS3.7 Table 9.3-2
		{"the SOP instance is copied", rsp.AffectedSOPInstanceUID, testInstance},                     // PS3.7 Table 9.3-2
		{"no data set follows", rsp.CommandDataSetType, NoDataSet},                                   // PS3.7 Table 9.3-2
		{"the status is kept", rsp.Status, StatusCoercionOfDataElements},
		{"the comment is cut to 64 characters", len(rsp.ErrorComment), MaxCommentLen}, // PS3.5 Table 6.2-1, LO
		{"the response has no message ID of its own", rsp.MessageID, uint16(0)},
	}
	for _, c := range checks {
		t.Run(c.name, func(t *testing.T) {
			if c.got != c.want {
				t.Errorf("got %v, want %v", c.got, c.want)
			}
		})
	}
}
