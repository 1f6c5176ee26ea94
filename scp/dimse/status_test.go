package dimse

import "testing"

func TestStatusClass(t *testing.T) {
	tests := []struct {
		code Status
		want StatusClass
	}{
		{0x0000, ClassSuccess}, // PS3.7 Annex C: Success 0000
		{0x0001, ClassWarning}, // PS3.7 Annex C: Warning 0001
		{0x0107, ClassWarning}, // PS3.7 Annex C: Warning 0107 (attribute list error)
		{0x0116, ClassWarning}, // PS3.7 Annex C: Warning 0116 (attribute value out of range)
		{0xB000, ClassWarning}, // PS3.4 Table B.2-1: Coercion of Data Elements
		{0xB006, ClassWarning}, // PS3.4 Table B.2-1: Elements Discarded
		{0xB007, ClassWarning}, // PS3.4 Table B.2-1: Data Set does not match SOP Class
		{0xBFFF, ClassWarning}, // PS3.7 Annex C: Warning Bxxx
		{0xFE00, ClassCancel},  // PS3.7 Annex C: Cancel FE00
		{0xFF00, ClassPending}, // PS3.7 Annex C: Pending FF00
		{0xFF01, ClassPending}, // PS3.7 Annex C: Pending FF01
		{0x0105, ClassFailure}, // PS3.7 Annex C: Failure 01xx except 0107 and 0116
		{0x0110, ClassFailure}, // PS3.7 Annex C: 01xx (processing failure)
		{0x0111, ClassFailure}, // PS3.7 Annex C: 01xx (duplicate SOP instance)
		{0x0122, ClassFailure}, // PS3.7 Annex C: 01xx (SOP class not supported)
		{0x0211, ClassFailure}, // PS3.7 Annex C: Failure 02xx (unrecognized operation)
		{0xA700, ClassFailure}, // PS3.4 Table B.2-1: Refused: Out of Resources A7xx
		{0xA7FF, ClassFailure}, // PS3.4 Table B.2-1: A7xx
		{0xA900, ClassFailure}, // PS3.4 Table B.2-1: Error: Data Set does not match SOP Class A9xx
		{0xC000, ClassFailure}, // PS3.4 Table B.2-1: Error: Cannot understand Cxxx
		{0xCFFF, ClassFailure}, // PS3.7 Annex C: Failure Cxxx
		{0xD000, ClassFailure}, // not assigned by PS3.7 Annex C: treated as failure, never as success
		{0xFE01, ClassFailure}, // not assigned: only FE00 is cancel (PS3.7 Annex C)
		{0xFF02, ClassFailure}, // not assigned: only FF00 and FF01 are pending (PS3.7 Annex C)
	}
	for _, tt := range tests {
		t.Run(tt.code.String()+" is "+tt.want.String(), func(t *testing.T) {
			if got := tt.code.Class(); got != tt.want {
				t.Errorf("Class() = %v, want %v", got, tt.want)
			}
		})
	}
}

func TestStatusString(t *testing.T) {
	tests := []struct {
		code Status
		want string
	}{
		{StatusSuccess, "0x0000 (success)"},
		{StatusOutOfResources, "0xA700 (out of resources)"},                                                // PS3.4 Table B.2-1
		{0xA7C3, "0xA7C3 (out of resources)"},                                                              // PS3.4 Table B.2-1: whole A7xx range
		{0xA912, "0xA912 (data set does not match SOP class)"},                                             // PS3.4 Table B.2-1: A9xx
		{0xC123, "0xC123 (cannot understand)"},                                                             // PS3.4 Table B.2-1: Cxxx
		{StatusSOPClassNotSupported, "0x0122 (SOP class not supported)"},                                   // PS3.7 C.5, meaning as in pynetdicom's GENERAL_STATUS table
		{StatusProcessingFailure, "0x0110 (processing failure)"},                                           // PS3.7 C.5, meaning as in pynetdicom's GENERAL_STATUS table
		{StatusDataSetDoesNotMatchSOPClassWarning, "0xB007 (data set does not match SOP class (warning))"}, // PS3.4 Table B.2-1
		{0xB123, "0xB123 (warning)"},
		{0xD000, "0xD000 (failure)"},
	}
	for _, tt := range tests {
		t.Run(tt.want, func(t *testing.T) {
			if got := tt.code.String(); got != tt.want {
				t.Errorf("String() = %q", got)
			}
		})
	}
}

func TestCommandFieldNamesAndDirection(t *testing.T) {
	tests := []struct {
		field   CommandField
		name    string
		request bool
	}{
		{CStoreRQ, "C-STORE-RQ", true},                 // PS3.7 E.1: 0001H
		{CStoreRSP, "C-STORE-RSP", false},              // PS3.7 E.1: 8001H
		{CEchoRQ, "C-ECHO-RQ", true},                   // PS3.7 E.1: 0030H
		{CEchoRSP, "C-ECHO-RSP", false},                // PS3.7 E.1: 8030H
		{CFindRQ, "C-FIND-RQ", true},                   // PS3.7 E.1: 0020H
		{CGetRSP, "C-GET-RSP", false},                  // PS3.7 E.1: 8010H
		{CMoveRQ, "C-MOVE-RQ", true},                   // PS3.7 E.1: 0021H
		{CCancelRQ, "C-CANCEL-RQ", true},               // PS3.7 E.1: 0FFFH
		{NEventReportRSP, "N-EVENT-REPORT-RSP", false}, // PS3.7 E.1: 8100H
		{NDeleteRQ, "N-DELETE-RQ", true},               // PS3.7 E.1: 0150H
		{0x0042, "CommandField(0x0042)", true},
		{0x8FFF, "CommandField(0x8FFF)", false},
	}
	for _, tt := range tests {
		t.Run(tt.name+" has the right name and direction", func(t *testing.T) {
			if got := tt.field.String(); got != tt.name {
				t.Errorf("String() = %q", got)
			}
			if got := tt.field.isRequest(); got != tt.request {
				t.Errorf("IsRequest() = %v", got)
			}
		})
	}
}

func TestPriorityString(t *testing.T) {
	tests := []struct {
		p    Priority
		want string
	}{
		{PriorityMedium, "MEDIUM"}, // PS3.7 Table 9.3-1: MEDIUM = 0000H
		{PriorityHigh, "HIGH"},     // PS3.7 Table 9.3-1: HIGH = 0001H
		{PriorityLow, "LOW"},       // PS3.7 Table 9.3-1: LOW = 0002H
		{Priority(7), "Priority(0x0007)"},
	}
	for _, tt := range tests {
		t.Run(tt.want, func(t *testing.T) {
			if got := tt.p.String(); got != tt.want {
				t.Errorf("String() = %q", got)
			}
		})
	}
}
