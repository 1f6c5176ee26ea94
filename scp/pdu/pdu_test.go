package pdu

import (
	"bytes"
	"encoding/hex"
	"errors"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"testing/iotest"

	"dwiaudit/internal/testtool"
)

// Test values. Every name, AE title and credential is invented; UIDs are
// DICOM's own (SOP classes, transfer syntaxes) or under 2.25.
const (
	testCalled    = "DWIAUDIT"
	testCalling   = "QUELLVANDER-MR1"
	testImplUID   = "2.25.4242"
	testImplName  = "DWIAUDIT_010"
	uidVerify     = "1.2.840.10008.1.1"           // Verification SOP Class, PS3.6 Annex A (from memory)
	uidImplicitLE = "1.2.840.10008.1.2"           // Implicit VR Little Endian, PS3.5 10.1 (from memory)
	uidExplicitLE = "1.2.840.10008.1.2.1"         // Explicit VR Little Endian, PS3.5 A.2 (from memory)
	uidMRStorage  = "1.2.840.10008.5.1.4.1.1.4"   // MR Image Storage, PS3.4 B.5 (from memory)
	uidEnhMR      = "1.2.840.10008.5.1.4.1.1.4.1" // Enhanced MR Image Storage, PS3.4 B.5 (from memory)
	uidStorageSvc = "1.2.840.10008.4.2"           // Storage Service Class, PS3.7 D.3.3.6 Note 1
)

// hx decodes hex with spaces, for expected bytes written field by field.
func hx(s string) []byte {
	b, err := hex.DecodeString(strings.ReplaceAll(s, " ", ""))
	if err != nil {
		panic(err)
	}
	return b
}

func cat(parts ...[]byte) []byte { return bytes.Join(parts, nil) }

// ae pads an AE title with spaces to 16 bytes, as PS3.8 Table 9-11 bytes
// 11-26 show it; written out here rather than taken from the encoder.
func ae(s string) []byte { return []byte(s + strings.Repeat(" ", 16-len(s))) }

// fixed68 is bytes 7-74 of an A-ASSOCIATE-RQ/AC (PS3.8 Tables 9-11, 9-17):
// protocol version 0001H, 2 reserved, called and calling AE title, 32
// reserved.
func fixed68() []byte {
	return cat(hx("0001 0000"), ae(testCalled), ae(testCalling), make([]byte, 32))
}

// appCtxItem is the application context item (PS3.8 Table 9-12): 10H,
// reserved, item-length 0015H (21 characters), the name (PS3.7 A.2.1).
func appCtxItem() []byte {
	return cat(hx("10 00 0015"), []byte("1.2.840.10008.3.1.1.1"))
}

func minimalRQ() *AssociateRQ {
	return &AssociateRQ{
		ProtocolVersion:    ProtocolVersion1,
		CalledAETitle:      testCalled,
		CallingAETitle:     testCalling,
		ApplicationContext: ApplicationContextName,
		PresentationContexts: []PresentationContextRQ{
			{ID: 1, AbstractSyntax: uidVerify, TransferSyntaxes: []string{uidImplicitLE}},
		},
		UserInfo: UserInformation{MaxLength: 16384, ImplementationClassUID: testImplUID, ImplementationVersionName: testImplName},
	}
}

func minimalRQBytes() []byte {
	return cat(
		hx("01 00 000000b8"), // PS3.8 Table 9-11: type 01H, reserved, PDU-length 184
		fixed68(),
		appCtxItem(),
		// PS3.8 Table 9-13: 20H, reserved, item-length 002EH (4+21+21),
		// ID 01H, three reserved bytes.
		hx("20 00 002e 01 00 00 00"),
		hx("30 00 0011"), []byte(uidVerify), // Table 9-14: abstract syntax, 17 characters
		hx("40 00 0011"), []byte(uidImplicitLE), // Table 9-15: transfer syntax, 17 characters
		hx("50 00 0025"),                      // Table 9-16: user information, item-length 37
		hx("51 00 0004 00004000"),             // PS3.8 D.1 Table D.1-1: max length 16384
		hx("52 00 0009"), []byte(testImplUID), // PS3.7 D.3.3.2 Table D.3-1
		hx("55 00 000c"), []byte(testImplName), // PS3.7 D.3.3.2 Table D.3-3
	)
}

func fullRQ() *AssociateRQ {
	rq := minimalRQ()
	rq.UserInfo = UserInformation{
		MaxLength:                 16384,
		ImplementationClassUID:    testImplUID,
		ImplementationVersionName: testImplName,
		AsyncOps:                  &AsyncOpsWindow{MaxOpsInvoked: 5, MaxOpsPerformed: 1},
		RoleSelections:            []RoleSelection{{SOPClassUID: uidMRStorage, SCURole: false, SCPRole: true}},
		ExtendedNegotiations:      []ExtendedNegotiation{{SOPClassUID: uidMRStorage, Info: []byte{1, 0, 1, 0}}},
		CommonExtendedNegotiations: []CommonExtendedNegotiation{{
			SOPClassUID: uidEnhMR, ServiceClassUID: uidStorageSvc, RelatedGeneralSOPClasses: []string{uidMRStorage},
		}},
		UserIdentity: &UserIdentityRQ{Type: userIdentityUsernamePasscode, PositiveResponseRequested: true,
			Primary: []byte("quellvander-tech"), Secondary: []byte("not-a-secret")},
	}
	return rq
}

func fullRQBytes() []byte {
	return cat(
		hx("01 00 0000017b"), // PS3.8 Table 9-11: PDU-length 379 = 68+25+50+4+232
		fixed68(),
		appCtxItem(),
		hx("20 00 002e 01 00 00 00"), // Table 9-13
		hx("30 00 0011"), []byte(uidVerify),
		hx("40 00 0011"), []byte(uidImplicitLE),
		hx("50 00 00e8"),                      // Table 9-16: item-length 232
		hx("51 00 0004 00004000"),             // PS3.8 Table D.1-1
		hx("52 00 0009"), []byte(testImplUID), // PS3.7 Table D.3-1
		hx("53 00 0004 0005 0001"), // PS3.7 D.3.3.3 Table D.3-7: invoked 5, performed 1
		// PS3.7 D.3.3.4 Table D.3-9: item-length 29, UID-length 25, UID,
		// SCU-role 0, SCP-role 1.
		hx("54 00 001d 0019"), []byte(uidMRStorage), hx("00 01"),
		hx("55 00 000c"), []byte(testImplName), // PS3.7 Table D.3-3
		// PS3.7 D.3.3.5 Table D.3-11: item-length 31, SOP-class-uid-length
		// 25, UID, service-class-application-information.
		hx("56 00 001f 0019"), []byte(uidMRStorage), hx("01 00 01 00"),
		// PS3.7 D.3.3.6 Tables D.3-12/D.3-13: 57H, sub-item-version 0,
		// item-length 77, SOP class (27), service class (17), related
		// general SOP class identification length 27 = one UID-length and
		// a 25-character UID.
		hx("57 00 004d 001b"), []byte(uidEnhMR), hx("0011"), []byte(uidStorageSvc),
		hx("001b 0019"), []byte(uidMRStorage),
		// PS3.7 D.3.3.7 Table D.3-14: item-length 34, type 2 (username and
		// passcode), positive response requested 1, primary length 16,
		// primary, secondary length 12, secondary.
		hx("58 00 0022 02 01 0010"), []byte("quellvander-tech"), hx("000c"), []byte("not-a-secret"),
	)
}

func fullAC() *AssociateAC {
	return &AssociateAC{
		ProtocolVersion:    ProtocolVersion1,
		CalledAETitle:      testCalled,
		CallingAETitle:     testCalling,
		ApplicationContext: ApplicationContextName,
		PresentationContexts: []PresentationContextAC{
			{ID: 1, Result: PCAcceptance, TransferSyntax: uidExplicitLE},
			{ID: 3, Result: PCAbstractSyntaxNotSupported},
		},
		UserInfo: UserInformation{
			MaxLength:                 65536,
			ImplementationClassUID:    testImplUID,
			ImplementationVersionName: testImplName,
			AsyncOps:                  &AsyncOpsWindow{MaxOpsInvoked: 1, MaxOpsPerformed: 1},
			RoleSelections:            []RoleSelection{{SOPClassUID: uidMRStorage, SCURole: false, SCPRole: true}},
			UserIdentityResponse:      &UserIdentityAC{ServerResponse: []byte("ok")},
		},
	}
}

func fullACBytes() []byte {
	return cat(
		hx("02 00 000000e2"), // PS3.8 Table 9-17: type 02H, PDU-length 226 = 68+25+31+12+4+86
		fixed68(),            // Table 9-17 bytes 11-42 echo the RQ's AE titles
		appCtxItem(),
		// PS3.8 9.3.3.2 Table 9-18: 21H, reserved, item-length 27, ID 1,
		// reserved, result 0 acceptance, reserved; Table 9-19 transfer
		// syntax sub-item of 19 characters.
		hx("21 00 001b 01 00 00 00"), hx("40 00 0013"), []byte(uidExplicitLE),
		// Table 9-18: ID 3, result 3 abstract-syntax-not-supported, with an
		// empty transfer syntax sub-item ("shall not be significant").
		hx("21 00 0008 03 00 03 00"), hx("40 00 0000"),
		hx("50 00 0056"),                      // Table 9-20: item-length 86
		hx("51 00 0004 00010000"),             // PS3.8 Table D.1-2: 65536
		hx("52 00 0009"), []byte(testImplUID), // PS3.7 Table D.3-2
		hx("53 00 0004 0001 0001"),                               // PS3.7 Table D.3-8
		hx("54 00 001d 0019"), []byte(uidMRStorage), hx("00 01"), // PS3.7 Table D.3-10
		hx("55 00 000c"), []byte(testImplName), // PS3.7 Table D.3-4
		hx("59 00 0004 0002"), []byte("ok"), // PS3.7 D.3.3.7 Table D.3-15: server-response-length 2
	)
}

// layoutCases are PDUs with their bytes written out from the PS3.8 and PS3.7
// tables cited beside each part.
func layoutCases() []struct {
	name string
	p    PDU
	want []byte
} {
	return []struct {
		name string
		p    PDU
		want []byte
	}{
		{"A-ASSOCIATE-RQ with one context", minimalRQ(), minimalRQBytes()},
		{"A-ASSOCIATE-RQ with every user information sub-item", fullRQ(), fullRQBytes()},
		{"A-ASSOCIATE-AC with an accepted and a rejected context", fullAC(), fullACBytes()},
		{"A-ASSOCIATE-RJ called AE title not recognized",
			&AssociateRJ{Result: RejectPermanent, Source: SourceServiceUser, Reason: ReasonCalledAENotRecognized},
			// PS3.8 Table 9-21: 03H, reserved, length 4, reserved, result 1,
			// source 1, reason 7.
			hx("03 00 00000004 00 01 01 07")},
		{"P-DATA-TF with two PDVs",
			&PDataTF{Items: []PDV{
				{ContextID: 1, Command: true, Last: true, Data: []byte{0x01, 0x02}},
				{ContextID: 3, Command: false, Last: false, Data: []byte("abcd")},
			}},
			cat(
				hx("04 00 00000012"), // PS3.8 Table 9-22: PDU-length 18 = 8+10
				// Table 9-23: item-length 4, context 1; E.2 control header
				// 03H = command (bit 0) and last (bit 1).
				hx("00000004 01 03 0102"),
				// Table 9-23: item-length 6, context 3; E.2: 00H = data
				// set, not last.
				hx("00000006 03 00"), []byte("abcd"),
			)},
		{"A-RELEASE-RQ", &ReleaseRQ{}, hx("05 00 00000004 00000000")}, // PS3.8 Table 9-24
		{"A-RELEASE-RP", &ReleaseRP{}, hx("06 00 00000004 00000000")}, // PS3.8 Table 9-25
		{"A-ABORT by the provider for an invalid parameter value",
			&Abort{Source: AbortSourceServiceProvider, Reason: AbortReasonInvalidPDUParameterValue},
			hx("07 00 00000004 00 00 02 06")}, // PS3.8 Table 9-26: source 2, reason 6
		{"A-ABORT by the user",
			&Abort{Source: AbortSourceServiceUser},
			hx("07 00 00000004 00 00 00 00")}, // PS3.8 Table 9-26: source 0, reason sent as 00H
	}
}

func TestEncodingMatchesTheStandardsLayouts(t *testing.T) {
	for _, tc := range layoutCases() {
		t.Run(tc.name+" encodes byte for byte", func(t *testing.T) {
			got, err := Encode(tc.p)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, tc.want) {
				t.Errorf("encoding\n got %x\nwant %x", got, tc.want)
			}
		})
		t.Run(tc.name+" decodes to the same value", func(t *testing.T) {
			got, err := Decode(tc.want)
			if err != nil {
				t.Fatal(err)
			}
			assertSamePDU(t, got, tc.p)
		})
	}
}

// assertSamePDU compares PDUs, treating nil and empty PDV data alike.
func assertSamePDU(t *testing.T, got, want PDU) {
	t.Helper()
	if g, ok := got.(*PDataTF); ok {
		w, ok := want.(*PDataTF)
		if !ok || len(g.Items) != len(w.Items) {
			t.Fatalf("got %+v, want %+v", got, want)
		}
		for i := range g.Items {
			gi, wi := g.Items[i], w.Items[i]
			if gi.ContextID != wi.ContextID || gi.Command != wi.Command || gi.Last != wi.Last || !bytes.Equal(gi.Data, wi.Data) {
				t.Errorf("PDV %d: got %+v, want %+v", i, gi, wi)
			}
		}
		return
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got  %#v\nwant %#v", got, want)
	}
}

func TestEveryPDUTypeRoundTripsThroughOneStream(t *testing.T) {
	var stream bytes.Buffer
	cases := layoutCases()
	for _, tc := range cases {
		if err := write(&stream, tc.p); err != nil {
			t.Fatal(err)
		}
	}
	// One byte at a time, so that every read is short.
	rd := NewReader(iotest.OneByteReader(&stream), 0)
	for _, tc := range cases {
		got, err := rd.Next()
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		assertSamePDU(t, got, tc.p)
	}
	if _, err := rd.Next(); err != io.EOF {
		t.Errorf("after the last PDU: %v, want io.EOF", err)
	}
}

func TestStringsNameValuesAsTheStandardDoes(t *testing.T) {
	cases := []struct {
		name string
		got  string
		want string
	}{
		{"A-ASSOCIATE-RQ type", TypeAssociateRQ.String(), "A-ASSOCIATE-RQ"}, // PS3.8 9.3.1
		{"A-ASSOCIATE-AC type", TypeAssociateAC.String(), "A-ASSOCIATE-AC"},
		{"A-ASSOCIATE-RJ type", TypeAssociateRJ.String(), "A-ASSOCIATE-RJ"},
		{"P-DATA-TF type", TypePDataTF.String(), "P-DATA-TF"},
		{"A-RELEASE-RQ type", TypeReleaseRQ.String(), "A-RELEASE-RQ"},
		{"A-RELEASE-RP type", TypeReleaseRP.String(), "A-RELEASE-RP"},
		{"A-ABORT type", TypeAbort.String(), "A-ABORT"},
		{"unknown type", Type(0x42).String(), "PDU type 0x42"},
		{"PC acceptance", PCAcceptance.String(), "acceptance"}, // PS3.8 Table 9-18
		{"PC user rejection", PCUserRejection.String(), "user-rejection"},
		{"PC no reason", PCNoReason.String(), "no-reason (provider rejection)"},
		{"PC abstract syntax", PCAbstractSyntaxNotSupported.String(), "abstract-syntax-not-supported (provider rejection)"},
		{"PC transfer syntaxes", PCTransferSyntaxesNotSupported.String(), "transfer-syntaxes-not-supported (provider rejection)"},
		{"PC reserved", PCResult(9).String(), "reserved result 9"},
		{"abort reason 6", AbortReasonInvalidPDUParameterValue.String(), "invalid-PDU-parameter-value"}, // PS3.8 Table 9-26
		{"abort reason 1", AbortReasonUnrecognizedPDU.String(), "unrecognized-PDU"},
		{"abort reason 2", AbortReasonUnexpectedPDU.String(), "unexpected-PDU"},
		{"abort reason 4", AbortReasonUnrecognizedPDUParameter.String(), "unrecognized-PDU-parameter"},
		{"abort reason 5", AbortReasonUnexpectedPDUParameter.String(), "unexpected-PDU-parameter"},
		{"abort reason 0", AbortReasonNotSpecified.String(), "reason-not-specified"},
		{"abort by provider", (&Abort{Source: AbortSourceServiceProvider, Reason: AbortReasonUnexpectedPDU}).String(), "A-ABORT by service-provider: unexpected-PDU"},
		{"abort by user", (&Abort{Source: AbortSourceServiceUser}).String(), "A-ABORT by service-user"},
	}
	for _, tc := range cases {
		t.Run(tc.name+" reads "+tc.want, func(t *testing.T) {
			if tc.got != tc.want {
				t.Errorf("got %q, want %q", tc.got, tc.want)
			}
		})
	}
}

func TestRejectDescribeDependsOnTheSource(t *testing.T) {
	// PS3.8 9.3.4 Table 9-21: the same reason number means different things
	// for each source.
	cases := []struct {
		rj       AssociateRJ
		describe string
		str      string
	}{
		{AssociateRJ{RejectPermanent, SourceServiceUser, ReasonCalledAENotRecognized}, "called AE title not recognized",
			"rejected-permanent by service-user: called AE title not recognized"},
		{AssociateRJ{RejectPermanent, SourceServiceUser, ReasonCallingAENotRecognized}, "calling AE title not recognized", ""},
		{AssociateRJ{RejectPermanent, SourceServiceUser, ReasonApplicationContextNotSupported}, "application context name not supported", ""},
		{AssociateRJ{RejectPermanent, SourceServiceUser, ReasonNoReasonGiven}, "no reason given", ""},
		{AssociateRJ{RejectPermanent, SourceServiceProviderACSE, ReasonProtocolVersionNotSupported}, "protocol version not supported",
			"rejected-permanent by service-provider (ACSE): protocol version not supported"},
		{AssociateRJ{RejectTransient, SourceServiceProviderACSE, ReasonACSENoReason}, "no reason given", ""},
		{AssociateRJ{RejectTransient, SourceServiceProviderPresentation, ReasonTemporaryCongestion}, "temporary congestion",
			"rejected-transient by service-provider (presentation): temporary congestion"},
		{AssociateRJ{RejectTransient, SourceServiceProviderPresentation, ReasonLocalLimitExceeded}, "local limit exceeded", ""},
		{AssociateRJ{RejectPermanent, SourceServiceUser, 5}, "reserved reason 5", ""},
		{AssociateRJ{RejectPermanent, SourceServiceProviderPresentation, 7}, "reserved reason 7", ""},
	}
	for _, tc := range cases {
		t.Run("source "+tc.rj.Source.String()+" reason "+tc.describe, func(t *testing.T) {
			if got := tc.rj.Describe(); got != tc.describe {
				t.Errorf("Describe() = %q, want %q", got, tc.describe)
			}
			if tc.str != "" {
				if got := tc.rj.String(); got != tc.str {
					t.Errorf("String() = %q, want %q", got, tc.str)
				}
			}
		})
	}
}

// patch returns a copy of b with the bytes at off replaced.
func patch(b []byte, off int, with ...byte) []byte {
	c := bytes.Clone(b)
	copy(c[off:], with)
	return c
}

func TestReceivingToleratesPaddingAndNeverSendsIt(t *testing.T) {
	// An A-ASSOCIATE-RQ as a sloppy peer might send it: AE titles with a
	// leading space and NUL padding, every UID padded with a NUL or a space
	// to an even length (PS3.5 9.1 style, which PS3.8 Annex F forbids in
	// items), and every reserved byte FFH ("not tested to this value when
	// received", PS3.8 Tables 9-11, 9-13, 9-16).
	padded := cat(
		hx("01 ff 000000df"), // PDU-length 223: 68+26+(4+48)+(4+73)
		hx("0001 ffff"),
		[]byte(" DWIAUDIT\x00\x00\x00\x00\x00\x00\x00"),
		[]byte("QUELLVANDER-MR1\x00"),
		bytes.Repeat([]byte{0xff}, 32),
		hx("10 ff 0016"), []byte("1.2.840.10008.3.1.1.1\x00"),
		hx("20 ff 0030 01 ff ff ff"), // 4+22+22
		hx("30 ff 0012"), []byte(uidVerify+"\x00"),
		hx("40 ff 0012"), []byte(uidImplicitLE+" "),
		hx("50 ff 0049"), // 8+14+34+17
		hx("51 ff 0004 00004000"),
		hx("52 ff 000a"), []byte(testImplUID+"\x00"),
		hx("54 ff 001e 001a"), []byte(uidMRStorage+"\x00"), hx("01 01"),
		hx("55 ff 000d"), []byte(testImplName+" "),
	)
	got, err := Decode(padded)
	if err != nil {
		t.Fatal(err)
	}
	want := minimalRQ()
	want.UserInfo.RoleSelections = []RoleSelection{{SOPClassUID: uidMRStorage, SCURole: true, SCPRole: true}}
	assertSamePDU(t, got, want)

	t.Run("re-encoding writes AE titles space-padded and UIDs unpadded", func(t *testing.T) {
		enc, err := Encode(got)
		if err != nil {
			t.Fatal(err)
		}
		// AE titles: 16 characters, trailing spaces, never NUL (PS3.8
		// Table 9-11 bytes 11-42).
		if !bytes.Equal(enc[10:42], cat(ae(testCalled), ae(testCalling))) {
			t.Errorf("AE title fields %q", enc[10:42])
		}
		if bytes.IndexByte(enc, 0x00) < 0 {
			t.Fatal("test is broken: an encoding without any zero byte")
		}
		// No UID ends in NUL or space (PS3.8 Annex F "Components shall not
		// be padded"): walk the items and look at the last byte of each.
		var checked int
		checkUnpadded := func(what string, v []byte) {
			checked++
			if n := len(v); n == 0 || v[n-1] == 0 || v[n-1] == ' ' {
				t.Errorf("%s %q is empty or padded", what, v)
			}
		}
		walk := func(b []byte, f func(typ byte, v []byte)) {
			for len(b) >= 4 {
				l := int(b[2])<<8 | int(b[3])
				f(b[0], b[4:4+l])
				b = b[4+l:]
			}
		}
		walk(enc[headerLength+associateFixedLength:], func(typ byte, v []byte) {
			switch typ {
			case 0x10: // Table 9-12
				checkUnpadded("application context", v)
			case 0x20: // Table 9-13
				walk(v[4:], func(typ byte, v []byte) { checkUnpadded("syntax", v) })
			case 0x50: // Table 9-16
				walk(v, func(typ byte, v []byte) {
					switch typ {
					case 0x52, 0x55: // PS3.7 Tables D.3-1, D.3-3
						checkUnpadded("implementation sub-item", v)
					case 0x54: // PS3.7 Table D.3-9
						checkUnpadded("role selection UID", v[2:len(v)-2])
					}
				})
			}
		})
		if checked != 6 {
			t.Errorf("checked %d strings, want 6", checked)
		}
	})

	t.Run("a called AE title of trailing NULs and spaces mixed is trimmed", func(t *testing.T) {
		b := patch(minimalRQBytes(), 10, []byte("DWIAUDIT \x00 \x00\x00\x00\x00\x00")...)
		p, err := Decode(b)
		if err != nil {
			t.Fatal(err)
		}
		if got := p.(*AssociateRQ).CalledAETitle; got != testCalled {
			t.Errorf("called AE title %q", got)
		}
	})
	t.Run("a UID padded with several trailing NULs is trimmed", func(t *testing.T) {
		var b bytes.Buffer
		b.Write(hx("10 00 0017"))
		b.WriteString(ApplicationContextName + "\x00\x00")
		if got := trimUID(b.Bytes()[4:]); got != ApplicationContextName {
			t.Errorf("trimUID = %q", got)
		}
	})
}

func TestUnknownItemsAreSkipped(t *testing.T) {
	// PS3.8 9.3.1: "Items of unrecognized types shall be ignored and
	// skipped"; PS3.8 D.2 Note 2: acceptors "are required to ignore such
	// unrecognized user information Sub-Items".
	unknownTop := hx("60 00 0003 aabbcc")
	unknownInPC := hx("35 00 0002 0102")
	unknownUser := hx("5a 00 0001 ff")
	unknownUserHigh := hx("ff 00 0000")
	b := cat(
		hx("01 00 000000ce"), // 184 + 7 + 6 + 5 + 4 = 206
		fixed68(),
		unknownTop,
		appCtxItem(),
		hx("20 00 0034 01 00 00 00"), // 46 + 6
		hx("30 00 0011"), []byte(uidVerify),
		unknownInPC,
		hx("40 00 0011"), []byte(uidImplicitLE),
		hx("50 00 002e"), // 37 + 5 + 4
		unknownUser,
		hx("51 00 0004 00004000"),
		hx("52 00 0009"), []byte(testImplUID),
		unknownUserHigh,
		hx("55 00 000c"), []byte(testImplName),
	)
	got, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	assertSamePDU(t, got, minimalRQ())
}

// expectParseError checks err is a *parseError with the given reason that
// matches errMalformed.
func expectParseError(t *testing.T, err error, reason AbortReason) {
	t.Helper()
	var pe *parseError
	if !errors.As(err, &pe) {
		t.Fatalf("error %v (%T), want *ParseError", err, err)
	}
	if !errors.Is(err, errMalformed) {
		t.Errorf("%v does not match ErrMalformed", err)
	}
	if pe.Reason != reason {
		t.Errorf("abort reason %v, want %v (%v)", pe.Reason, reason, err)
	}
	if AbortReasonFor(err) != reason {
		t.Errorf("AbortReasonFor = %v, want %v", AbortReasonFor(err), reason)
	}
}

// rqWith builds an A-ASSOCIATE-RQ from the fixed fields and the given
// variable items, with a correct PDU-length.
func rqWith(items ...[]byte) []byte { return pduWith(0x01, cat(fixed68(), cat(items...))) }

func pduWith(typ byte, body []byte) []byte {
	h := []byte{typ, 0, 0, 0, 0, 0}
	n := len(body)
	h[2], h[3], h[4], h[5] = byte(n>>24), byte(n>>16), byte(n>>8), byte(n)
	return cat(h, body)
}

func pcItem() []byte {
	return cat(hx("20 00 002e 01 00 00 00"), hx("30 00 0011"), []byte(uidVerify), hx("40 00 0011"), []byte(uidImplicitLE))
}

func userInfoWith(subs ...[]byte) []byte {
	v := cat(subs...)
	return cat([]byte{0x50, 0, byte(len(v) >> 8), byte(len(v))}, v)
}

func TestMalformedBodiesGiveTheAbortReasonToSend(t *testing.T) {
	maxLen := hx("51 00 0004 00004000")
	cases := []struct {
		name   string
		b      []byte
		reason AbortReason // PS3.8 9.3.8 Table 9-26
	}{
		{"an unknown PDU type is unrecognized-PDU", hx("08 00 00000004 00000000"), AbortReasonUnrecognizedPDU},
		{"PDU type 00H is unrecognized-PDU", hx("00 00 00000000"), AbortReasonUnrecognizedPDU},
		{"an A-ASSOCIATE-RQ shorter than its 68 fixed bytes", pduWith(0x01, make([]byte, 67)), AbortReasonInvalidPDUParameterValue},
		{"an item header cut short", rqWith(appCtxItem(), hx("20 00 00")), AbortReasonInvalidPDUParameterValue},
		{"an item length overrunning the PDU", rqWith(hx("10 00 ffff"), []byte("1.2")), AbortReasonInvalidPDUParameterValue},
		{"a presentation context item shorter than 4", rqWith(appCtxItem(), hx("20 00 0003 010000"), userInfoWith(maxLen)), AbortReasonInvalidPDUParameterValue},
		{"a sub-item overrunning its presentation context", rqWith(appCtxItem(), hx("20 00 0008 01 00 00 00 30 00 0005 31"), userInfoWith(maxLen)), AbortReasonInvalidPDUParameterValue},
		{"an even presentation context ID", rqWith(appCtxItem(), patch(pcItem(), 4, 2), userInfoWith(maxLen)), AbortReasonInvalidPDUParameterValue},
		{"a context without abstract syntax", rqWith(appCtxItem(), cat(hx("20 00 0019 01 00 00 00 40 00 0011"), []byte(uidImplicitLE)), userInfoWith(maxLen)), AbortReasonInvalidPDUParameterValue},
		{"a context without transfer syntax", rqWith(appCtxItem(), cat(hx("20 00 0019 01 00 00 00 30 00 0011"), []byte(uidVerify)), userInfoWith(maxLen)), AbortReasonInvalidPDUParameterValue},
		{"a context with two abstract syntaxes", rqWith(appCtxItem(), cat(hx("20 00 0043 01 00 00 00 30 00 0011"), []byte(uidVerify), hx("30 00 0011"), []byte(uidVerify), hx("40 00 0011"), []byte(uidImplicitLE)), userInfoWith(maxLen)), AbortReasonUnexpectedPDUParameter},
		{"no application context item", rqWith(pcItem(), userInfoWith(maxLen)), AbortReasonInvalidPDUParameterValue},
		{"no presentation context item", rqWith(appCtxItem(), userInfoWith(maxLen)), AbortReasonInvalidPDUParameterValue},
		{"no user information item", rqWith(appCtxItem(), pcItem()), AbortReasonInvalidPDUParameterValue},
		{"two application context items", rqWith(appCtxItem(), appCtxItem(), pcItem(), userInfoWith(maxLen)), AbortReasonUnexpectedPDUParameter},
		{"two user information items", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen), userInfoWith(maxLen)), AbortReasonUnexpectedPDUParameter},
		{"an AC presentation context item in an RQ", rqWith(appCtxItem(), pcItem(), hx("21 00 0004 01 00 00 00"), userInfoWith(maxLen)), AbortReasonUnexpectedPDUParameter},
		{"a user information sub-item at the top level", rqWith(appCtxItem(), pcItem(), maxLen, userInfoWith(maxLen)), AbortReasonUnexpectedPDUParameter},
		{"a max length sub-item of length 2", rqWith(appCtxItem(), pcItem(), userInfoWith(hx("51 00 0002 4000"))), AbortReasonInvalidPDUParameterValue},
		{"two max length sub-items", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, maxLen)), AbortReasonUnexpectedPDUParameter},
		{"an async window sub-item of length 3", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("53 00 0003 000100"))), AbortReasonInvalidPDUParameterValue},
		{"a user information sub-item overrunning its item", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("52 00 0009 31"))), AbortReasonInvalidPDUParameterValue},
		{"a role selection UID-length overrunning its sub-item", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("54 00 0005 0040 31 01 01"))), AbortReasonInvalidPDUParameterValue},
		{"a role selection without its role bytes", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("54 00 0003 0001 31"))), AbortReasonInvalidPDUParameterValue},
		{"a role selection with surplus bytes", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("54 00 0006 0001 31 01 01 00"))), AbortReasonInvalidPDUParameterValue},
		{"an extended negotiation UID-length overrunning", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("56 00 0003 0002 31"))), AbortReasonInvalidPDUParameterValue},
		{"a common extended negotiation related UID overrunning", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("57 00 000b 0001 31 0001 32 0003 0005 33"))), AbortReasonInvalidPDUParameterValue},
		{"a user identity primary length overrunning", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("58 00 0006 01 00 0010 6161"))), AbortReasonInvalidPDUParameterValue},
		{"a user identity without secondary length", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("58 00 0006 01 00 0002 6161"))), AbortReasonInvalidPDUParameterValue},
		{"a user identity response sub-item in an RQ", rqWith(appCtxItem(), pcItem(), userInfoWith(maxLen, hx("59 00 0002 0000"))), AbortReasonUnexpectedPDUParameter},
		{"a user identity sub-item in an AC", pduWith(0x02, cat(fixed68(), appCtxItem(), hx("21 00 0008 01 00 03 00 40 00 0000"), userInfoWith(maxLen, hx("58 00 0006 01 00 0000 0000")))), AbortReasonUnexpectedPDUParameter},
		{"an accepted AC context without transfer syntax", pduWith(0x02, cat(fixed68(), appCtxItem(), hx("21 00 0004 01 00 00 00"), userInfoWith(maxLen))), AbortReasonInvalidPDUParameterValue},
		{"an RQ presentation context item in an AC", pduWith(0x02, cat(fixed68(), appCtxItem(), pcItem(), userInfoWith(maxLen))), AbortReasonUnexpectedPDUParameter},
		{"an AC context with two transfer syntaxes", pduWith(0x02, cat(fixed68(), appCtxItem(), hx("21 00 000c 01 00 00 00 40 00 0000 40 00 0000"), userInfoWith(maxLen))), AbortReasonUnexpectedPDUParameter},
		{"an A-ASSOCIATE-RJ of length 3", hx("03 00 00000003 000101"), AbortReasonInvalidPDUParameterValue},
		{"an A-RELEASE-RQ of length 5", hx("05 00 00000005 0000000000"), AbortReasonInvalidPDUParameterValue},
		{"an A-RELEASE-RP of length 0", hx("06 00 00000000"), AbortReasonInvalidPDUParameterValue},
		{"an A-ABORT of length 2", hx("07 00 00000002 0000"), AbortReasonInvalidPDUParameterValue},
		{"a P-DATA-TF with zero PDVs", hx("04 00 00000000"), AbortReasonInvalidPDUParameterValue},
		{"a PDV item length below 2", hx("04 00 00000005 00000001 01"), AbortReasonInvalidPDUParameterValue},
		{"a PDV item length overrunning the PDU", hx("04 00 00000008 00000010 0103 0000"), AbortReasonInvalidPDUParameterValue},
		{"a PDV header cut short", hx("04 00 00000009 00000002 0103 000000"), AbortReasonInvalidPDUParameterValue},
		{"a PDV on an even context ID", hx("04 00 00000006 00000002 0203"), AbortReasonInvalidPDUParameterValue},
		{"bytes after the PDU", hx("05 00 00000004 00000000 00"), AbortReasonInvalidPDUParameterValue},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Decode(tc.b)
			expectParseError(t, err, tc.reason)
			if tc.reason == AbortReasonUnrecognizedPDU && !errors.Is(err, errUnknownType) {
				t.Errorf("%v does not match ErrUnknownType", err)
			}
			// The Reader reports the same, except for the trailing bytes,
			// which it leaves for the next PDU.
			if tc.name != "bytes after the PDU" {
				_, err = NewReader(bytes.NewReader(tc.b), 0).Next()
				expectParseError(t, err, tc.reason)
			}
		})
	}
}

// countingReader counts the bytes read through it.
type countingReader struct {
	r io.Reader
	n int
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += n
	return n, err
}

func TestDeclaredLengthsAboveTheLimitAreRefusedBeforeAllocating(t *testing.T) {
	cases := []struct {
		name     string
		header   []byte
		maxPData uint32
		wantMax  uint32
	}{
		{"an A-ASSOCIATE-RQ declaring 4 GiB", hx("01 00 ffffffff"), 16384, maxAssociatePDULength},
		{"an A-ASSOCIATE-AC one byte over MaxAssociatePDULength", hx("02 00 00040001"), 16384, maxAssociatePDULength},
		{"an A-ABORT declaring 4 GiB", hx("07 00 ffffffff"), 16384, maxAssociatePDULength},
		{"a P-DATA-TF one byte over the advertised maximum", hx("04 00 00004001"), 16384, 16384},
		{"a P-DATA-TF declaring 4 GiB with no maximum advertised", hx("04 00 ffffffff"), 0, maxPDataLengthCeiling},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			// Only the header is there: the Reader must not wait for, or
			// make room for, a body.
			br := bytes.NewReader(tc.header)
			src := &countingReader{r: br}
			rd := NewReader(src, tc.maxPData)
			var err error
			allocs := testing.AllocsPerRun(1, func() {
				br.Reset(tc.header)
				_, err = rd.Next()
			})
			if allocs > 1 { // the *tooLongError itself
				t.Errorf("%v allocations, want at most the error", allocs)
			}
			var tl *tooLongError
			if !errors.As(err, &tl) || !errors.Is(err, errTooLong) {
				t.Fatalf("error %v, want *TooLongError", err)
			}
			if tl.Max != tc.wantMax || tl.Type != Type(tc.header[0]) || tl.Length != uint32(tc.header[2])<<24|uint32(tc.header[3])<<16|uint32(tc.header[4])<<8|uint32(tc.header[5]) {
				t.Errorf("got %+v, want max %d", tl, tc.wantMax)
			}
			if AbortReasonFor(err) != AbortReasonInvalidPDUParameterValue {
				t.Errorf("AbortReasonFor = %v", AbortReasonFor(err))
			}
			if src.n != 2*headerLength { // the warm-up run and the measured one
				t.Errorf("read %d bytes, want only the headers", src.n)
			}
			if cap(rd.buf) != 0 {
				t.Errorf("buffer grew to %d", cap(rd.buf))
			}
		})
	}
	t.Run("a P-DATA-TF exactly at the advertised maximum is accepted", func(t *testing.T) {
		data := make([]byte, 16384-PDVOverhead)
		b := AppendPDataHeader(nil, 1, false, true, len(data))
		b = append(b, data...)
		rd := NewReader(bytes.NewReader(b), 16384)
		if _, err := rd.Next(); err != nil {
			t.Fatal(err)
		}
		if cap(rd.buf) > 16384 {
			t.Errorf("buffer of %d bytes for a 16384 limit", cap(rd.buf))
		}
	})
	t.Run("SetMaxPDataLength lowers the limit for the next PDU", func(t *testing.T) {
		b := append(AppendPDataHeader(nil, 1, false, true, 100), make([]byte, 100)...)
		rd := NewReader(bytes.NewReader(append(bytes.Clone(b), b...)), 0)
		if _, err := rd.Next(); err != nil {
			t.Fatal(err)
		}
		rd.setMaxPDataLength(50)
		if rd.maxPDataLength() != 50 {
			t.Errorf("MaxPDataLength() = %d", rd.maxPDataLength())
		}
		if _, err := rd.Next(); !errors.Is(err, errTooLong) {
			t.Errorf("error %v, want ErrTooLong", err)
		}
	})
}

func TestTruncatedStreamsAreUnexpectedEOF(t *testing.T) {
	full := fullRQBytes()
	t.Run("an empty stream is a clean io.EOF", func(t *testing.T) {
		if _, err := NewReader(bytes.NewReader(nil), 0).Next(); err != io.EOF {
			t.Errorf("error %v, want io.EOF itself", err)
		}
	})
	t.Run("every cut inside an A-ASSOCIATE-RQ is io.ErrUnexpectedEOF", func(t *testing.T) {
		for n := 1; n < len(full); n++ {
			_, err := NewReader(bytes.NewReader(full[:n]), 0).Next()
			if !errors.Is(err, io.ErrUnexpectedEOF) {
				t.Fatalf("cut at %d: %v", n, err)
			}
			if _, err := Decode(full[:n]); !errors.Is(err, io.ErrUnexpectedEOF) {
				t.Fatalf("Decode cut at %d: %v", n, err)
			}
		}
	})
	t.Run("a stream ending after a whole PDU is io.EOF next", func(t *testing.T) {
		rd := NewReader(bytes.NewReader(full), 0)
		if _, err := rd.Next(); err != nil {
			t.Fatal(err)
		}
		if _, err := rd.Next(); err != io.EOF {
			t.Errorf("error %v, want io.EOF", err)
		}
	})
	t.Run("other read errors are wrapped, not hidden", func(t *testing.T) {
		boom := errors.New("connection reset by a test")
		_, err := NewReader(iotest.ErrReader(boom), 0).Next()
		if !errors.Is(err, boom) {
			t.Errorf("error %v does not wrap the read error", err)
		}
		if AbortReasonFor(err) != AbortReasonNotSpecified {
			t.Errorf("AbortReasonFor = %v", AbortReasonFor(err))
		}
	})
}

func TestReaderStopsAtThePDUBoundary(t *testing.T) {
	one := hx("05 00 00000004 00000000")
	rest := []byte("next owner's bytes")
	src := bytes.NewReader(cat(one, rest))
	if _, err := NewReader(src, 0).Next(); err != nil {
		t.Fatal(err)
	}
	if src.Len() != len(rest) {
		t.Errorf("%d bytes left, want %d: the Reader read ahead", src.Len(), len(rest))
	}
}

func TestPDataAliasesTheBufferAndCostsNoAllocation(t *testing.T) {
	const n = 1000
	data := bytes.Repeat([]byte{0xab}, n)
	pdu := append(AppendPDataHeader(nil, 5, false, false, n), data...)
	src := bytes.NewReader(nil)
	rd := NewReader(src, 0)
	read := func() *PDataTF {
		src.Reset(pdu)
		p, err := rd.Next()
		if err != nil {
			t.Fatal(err)
		}
		return p.(*PDataTF)
	}
	first := read()
	if &first.Items[0].Data[0] != &rd.buf[PDVOverhead] {
		t.Error("PDV data does not alias the Reader's buffer")
	}
	if cap(first.Items[0].Data) != n {
		t.Errorf("PDV data capacity %d, want %d so appends cannot overrun", cap(first.Items[0].Data), n)
	}
	allocs := testing.AllocsPerRun(100, func() { read() })
	if allocs != 0 {
		t.Errorf("%v allocations per P-DATA-TF, want 0", allocs)
	}
	if second := read(); second != first {
		t.Error("the Reader returned a new *PDataTF instead of reusing its own")
	}
}

func TestAppendPDataHeaderFramesOneFragment(t *testing.T) {
	data := []byte{0x08, 0x00, 0x00, 0x00}
	got := append(AppendPDataHeader([]byte("x"), 7, true, false, len(data)), data...)
	want := cat([]byte("x"),
		hx("04 00 0000000a"), // PS3.8 Table 9-22: PDU-length 10 = 6 + 4
		hx("00000006 07 01"), // Table 9-23: item-length 6 = 2 + 4, context 7; E.2: command, not last
		data)
	if !bytes.Equal(got, want) {
		t.Errorf("got %x, want %x", got, want)
	}
	same, err := (&PDataTF{Items: []PDV{{ContextID: 7, Command: true, Data: data}}}).appendTo([]byte("x"))
	if err != nil || !bytes.Equal(same, got) {
		t.Errorf("PDataTF.AppendTo gives %x (%v)", same, err)
	}
	for _, bad := range []struct {
		name string
		ctx  byte
		n    int
	}{{"a negative length", 1, -1}, {"an even context ID", 2, 0}} {
		t.Run(bad.name+" panics", func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Error("no panic")
				}
			}()
			AppendPDataHeader(nil, bad.ctx, false, false, bad.n)
		})
	}
}

func TestEncodingRefusesValuesTheStandardForbids(t *testing.T) {
	rq := func(edit func(*AssociateRQ)) PDU { p := minimalRQ(); edit(p); return p }
	ac := func(edit func(*AssociateAC)) PDU { p := fullAC(); edit(p); return p }
	cases := []struct {
		name string
		p    PDU
		want error
	}{
		{"an empty called AE title", rq(func(p *AssociateRQ) { p.CalledAETitle = "" }), errInvalidAETitle},
		{"a called AE title of 16 spaces", rq(func(p *AssociateRQ) { p.CalledAETitle = strings.Repeat(" ", 16) }), errInvalidAETitle}, // PS3.8 Table 9-11 "shall not be used"
		{"a 17-character calling AE title", rq(func(p *AssociateRQ) { p.CallingAETitle = "QUELLVANDER-MR-17" }), errInvalidAETitle},
		{"an AE title with a backslash", rq(func(p *AssociateRQ) { p.CallingAETitle = `MR\1` }), errInvalidAETitle}, // PS3.5 6.2 AE
		{"an AE title with a NUL", rq(func(p *AssociateRQ) { p.CallingAETitle = "MR\x001" }), errInvalidAETitle},    // PS3.5 6.2 AE
		{"an AE title with a tab", rq(func(p *AssociateRQ) { p.CalledAETitle = "MR\t1" }), errInvalidAETitle},       // PS3.5 6.2 AE
		{"an AC echoing an AE title with a control character", ac(func(p *AssociateAC) { p.CallingAETitle = "MR\x1b" }), errInvalidAETitle},
		{"an empty application context", rq(func(p *AssociateRQ) { p.ApplicationContext = "" }), errInvalidUID},
		{"a transfer syntax padded with NUL", rq(func(p *AssociateRQ) { p.PresentationContexts[0].TransferSyntaxes[0] += "\x00" }), errInvalidUID}, // PS3.8 Annex F
		{"an abstract syntax padded with a space", rq(func(p *AssociateRQ) { p.PresentationContexts[0].AbstractSyntax += " " }), errInvalidUID},
		{"a 65-character UID", rq(func(p *AssociateRQ) { p.UserInfo.ImplementationClassUID = "2.25." + strings.Repeat("1", 60) }), errInvalidUID}, // PS3.5 9.1: 64
		{"a UID with letters", rq(func(p *AssociateRQ) { p.PresentationContexts[0].AbstractSyntax = "1.2.abc" }), errInvalidUID},
		{"a role selection without SOP class", rq(func(p *AssociateRQ) { p.UserInfo.RoleSelections = []RoleSelection{{}} }), errInvalidUID},
		{"an even presentation context ID", rq(func(p *AssociateRQ) { p.PresentationContexts[0].ID = 2 }), errInvalidField}, // PS3.8 Table 9-13
		{"a context without transfer syntaxes", rq(func(p *AssociateRQ) { p.PresentationContexts[0].TransferSyntaxes = nil }), errInvalidField},
		{"an RQ without contexts", rq(func(p *AssociateRQ) { p.PresentationContexts = nil }), errInvalidField},
		{"an RQ carrying a user identity response", rq(func(p *AssociateRQ) { p.UserInfo.UserIdentityResponse = &UserIdentityAC{} }), errInvalidField},
		{"a 17-character implementation version name", rq(func(p *AssociateRQ) { p.UserInfo.ImplementationVersionName = "DWIAUDIT_0.1.0-17" }), errInvalidField}, // PS3.7 Table D.3-3
		{"extended negotiation information too long for its item", rq(func(p *AssociateRQ) {
			p.UserInfo.ExtendedNegotiations = []ExtendedNegotiation{{SOPClassUID: uidMRStorage, Info: make([]byte, 70000)}}
		}), errFieldTooLong},
		{"a user identity primary field over 65535 bytes", rq(func(p *AssociateRQ) {
			p.UserInfo.UserIdentity = &UserIdentityRQ{Type: 1, Primary: make([]byte, 65536)}
		}), errFieldTooLong},
		{"an accepted AC context without transfer syntax", ac(func(p *AssociateAC) { p.PresentationContexts[0].TransferSyntax = "" }), errInvalidUID},
		{"an AC carrying a user identity request", ac(func(p *AssociateAC) { p.UserInfo.UserIdentity = &UserIdentityRQ{} }), errInvalidField},
		{"an AC without contexts", ac(func(p *AssociateAC) { p.PresentationContexts = nil }), errInvalidField},
		{"a P-DATA-TF without PDVs", &PDataTF{}, errInvalidField}, // PS3.8 9.3.5 "one or more"
		{"a PDV on an even context ID", &PDataTF{Items: []PDV{{ContextID: 4}}}, errInvalidField},
		{"a nil PDU", nil, errInvalidField},
		{"a nil *AssociateRQ", (*AssociateRQ)(nil), errInvalidField},
	}
	for _, tc := range cases {
		t.Run(tc.name+" is refused", func(t *testing.T) {
			dst := []byte("prefix")
			got, err := appendPDU(dst, tc.p)
			if !errors.Is(err, tc.want) {
				t.Fatalf("error %v, want %v", err, tc.want)
			}
			if !bytes.Equal(got, []byte("prefix")) {
				t.Errorf("dst changed to %q on error", got)
			}
			if err := write(io.Discard, tc.p); !errors.Is(err, tc.want) {
				t.Errorf("Write: %v", err)
			}
		})
	}
	t.Run("a rejected AC context may leave its transfer syntax empty", func(t *testing.T) {
		if _, err := Encode(fullAC()); err != nil {
			t.Error(err)
		}
	})
}

func TestAETitlesAreTrimmedAndSpacePadded(t *testing.T) {
	for _, tc := range []struct{ in, field string }{
		{"A", "A               "},
		{"  MR1  ", "MR1             "},          // leading/trailing spaces are non-significant, PS3.8 Table 9-11
		{"QUELLVANDER-MR-1", "QUELLVANDER-MR-1"}, // exactly 16
		{"MR 1", "MR 1            "},             // an inner space is significant
	} {
		t.Run(strings.TrimSpace(tc.in)+" is written as 16 characters", func(t *testing.T) {
			p := minimalRQ()
			p.CalledAETitle = tc.in
			b, err := Encode(p)
			if err != nil {
				t.Fatal(err)
			}
			if got := string(b[10:26]); got != tc.field { // PS3.8 Table 9-11 bytes 11-26
				t.Errorf("field %q, want %q", got, tc.field)
			}
			back, _ := Decode(b)
			if got := back.(*AssociateRQ).CalledAETitle; got != strings.Trim(tc.in, " ") {
				t.Errorf("decoded %q", got)
			}
		})
	}
}

func TestWriteMakesOneWriteCallPerPDU(t *testing.T) {
	var w countingWriter
	for _, tc := range layoutCases() {
		if err := write(&w, tc.p); err != nil {
			t.Fatal(err)
		}
	}
	pw := newWriter(&w)
	for _, tc := range layoutCases() {
		if err := pw.Write(tc.p); err != nil {
			t.Fatal(err)
		}
	}
	if w.calls != 2*len(layoutCases()) {
		t.Errorf("%d Write calls for %d PDUs", w.calls, 2*len(layoutCases()))
	}
	rd := NewReader(bytes.NewReader(w.buf.Bytes()), 0)
	for range 2 {
		for _, tc := range layoutCases() {
			p, err := rd.Next()
			if err != nil {
				t.Fatal(err)
			}
			assertSamePDU(t, p, tc.p)
		}
	}
	t.Run("a Writer reusing its buffer costs no allocation per P-DATA-TF", func(t *testing.T) {
		pd := &PDataTF{Items: []PDV{{ContextID: 1, Last: true, Data: make([]byte, 4096)}}}
		pw := newWriter(io.Discard)
		_ = pw.Write(pd)
		if allocs := testing.AllocsPerRun(100, func() { _ = pw.Write(pd) }); allocs != 0 {
			t.Errorf("%v allocations", allocs)
		}
	})
	t.Run("a failing writer's error is wrapped", func(t *testing.T) {
		boom := errors.New("broken pipe in a test")
		if err := write(failingWriter{boom}, &ReleaseRQ{}); !errors.Is(err, boom) {
			t.Errorf("Write: %v", err)
		}
		if err := newWriter(failingWriter{boom}).Write(&ReleaseRP{}); !errors.Is(err, boom) {
			t.Errorf("Writer.Write: %v", err)
		}
	})
}

type countingWriter struct {
	buf   bytes.Buffer
	calls int
}

func (c *countingWriter) Write(p []byte) (int, error) {
	c.calls++
	return c.buf.Write(p)
}

type failingWriter struct{ err error }

func (f failingWriter) Write([]byte) (int, error) { return 0, f.err }

func TestAbortReasonForOtherErrors(t *testing.T) {
	if got := AbortReasonFor(nil); got != AbortReasonNotSpecified {
		t.Errorf("nil: %v", got)
	}
	wrapped := errors.Join(errors.New("context"), &parseError{Reason: AbortReasonUnexpectedPDUParameter})
	if got := AbortReasonFor(wrapped); got != AbortReasonUnexpectedPDUParameter {
		t.Errorf("wrapped ParseError: %v", got)
	}
}

// syntheticSeeds are the PDUs written to testdata/synth-*.pdu: every PDU
// type with every sub-item, as our encoder writes them.
func syntheticSeeds() map[string]PDU {
	multi := &PDataTF{Items: []PDV{
		{ContextID: 1, Command: true, Last: false, Data: hx("0000 0000 04000000 38000000")},
		{ContextID: 1, Command: true, Last: true, Data: hx("0000 0200 1a000000")},
		{ContextID: 3, Command: false, Last: true, Data: []byte("TEST^PHANTOM")},
	}}
	return map[string]PDU{
		"synth-associate-rq-minimal.pdu":      minimalRQ(),
		"synth-associate-rq-all-subitems.pdu": fullRQ(),
		"synth-associate-ac-all-subitems.pdu": fullAC(),
		"synth-associate-rj-called-ae.pdu":    &AssociateRJ{Result: RejectPermanent, Source: SourceServiceUser, Reason: ReasonCalledAENotRecognized},
		"synth-associate-rj-congestion.pdu":   &AssociateRJ{Result: RejectTransient, Source: SourceServiceProviderPresentation, Reason: ReasonTemporaryCongestion},
		"synth-p-data-tf-three-pdvs.pdu":      multi,
		"synth-abort-provider.pdu":            &Abort{Source: AbortSourceServiceProvider, Reason: AbortReasonUnexpectedPDU},
	}
}

func TestSyntheticSeedsAreCurrent(t *testing.T) {
	for name, p := range syntheticSeeds() {
		t.Run(name+" matches the encoder", func(t *testing.T) {
			b, err := Encode(p)
			if err != nil {
				t.Fatal(err)
			}
			testtool.Golden(t, filepath.Join("testdata", name), b)
		})
	}
}

// seedFiles returns the PDU files of testdata/.
func seedFiles(tb testing.TB) map[string][]byte {
	tb.Helper()
	entries, err := os.ReadDir("testdata")
	if err != nil {
		tb.Fatal(err)
	}
	files := map[string][]byte{}
	for _, e := range entries {
		if e.IsDir() || !strings.HasSuffix(e.Name(), ".pdu") {
			continue
		}
		b, err := os.ReadFile(filepath.Join("testdata", e.Name()))
		if err != nil {
			tb.Fatal(err)
		}
		files[e.Name()] = b
	}
	if len(files) == 0 {
		tb.Fatal("no seed files in testdata/")
	}
	return files
}

func TestEverySeedFileDecodesAndReencodesToItsBytes(t *testing.T) {
	for name, b := range seedFiles(t) {
		t.Run(name, func(t *testing.T) {
			p, err := Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			enc, err := Encode(p)
			if err != nil {
				t.Fatal(err)
			}
			want := b
			if p.Type() == TypeAssociateRQ && strings.HasPrefix(name, "dcmtk-") {
				want = zeroPCReservedBytes(t, b) // DCMTK's FFH reserved byte, see zeroPCReservedBytes
			}
			if !bytes.Equal(enc, want) {
				t.Errorf("re-encoding differs from the seed")
			}
		})
	}
}

func TestAssociatePDUsShareNothingWithTheReader(t *testing.T) {
	// Only a P-DATA-TF aliases the Reader's buffer; an A-ASSOCIATE-RQ must
	// stay intact when the next PDU overwrites it.
	var stream bytes.Buffer
	_ = write(&stream, fullRQ())
	_ = write(&stream, &PDataTF{Items: []PDV{{ContextID: 1, Data: bytes.Repeat([]byte{0xee}, 600)}}})
	rd := NewReader(&stream, 0)
	first, err := rd.Next()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := rd.Next(); err != nil {
		t.Fatal(err)
	}
	assertSamePDU(t, first, fullRQ())
}

func TestErrorMessagesNameWhatWentWrong(t *testing.T) {
	_, err := NewReader(bytes.NewReader(hx("01 00 ffffffff")), 0).Next()
	if want := "pdu: A-ASSOCIATE-RQ PDU-length 4294967295 exceeds limit 262144"; err == nil || err.Error() != want {
		t.Errorf("got %v, want %q", err, want)
	}
	_, err = Decode(hx("04 00 00000005 00000001 01"))
	if want := "pdu: malformed P-DATA-TF: PDV item-length 1, too short for context ID and message control header (abort reason invalid-PDU-parameter-value)"; err == nil || err.Error() != want {
		t.Errorf("got %v, want %q", err, want)
	}
	_, err = Decode(rqWith(appCtxItem(), cat(hx("20 00 0019 03 00 00 00 30 00 0011"), []byte(uidVerify)), userInfoWith(hx("51 00 0004 00004000"))))
	if err == nil || !strings.Contains(err.Error(), "presentation context 3: no transfer syntax sub-item") {
		t.Errorf("got %v", err)
	}
	_, err = Decode(rqWith(appCtxItem(), pcItem(), userInfoWith(hx("54 00 0003 0001 31"))))
	if err == nil || !strings.Contains(err.Error(), "user information sub-item 0x54: ends before a 1-byte field") {
		t.Errorf("got %v", err)
	}
}
