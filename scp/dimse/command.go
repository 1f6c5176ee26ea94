package dimse

import "fmt"

// CommandField is the value of Command Field (0000,0100): which DIMSE
// operation a message carries (PS3.7 E.1, the CommandField row).
type CommandField uint16

// Command Field values, PS3.7 E.1.
const (
	CStoreRQ  CommandField = 0x0001
	CStoreRSP CommandField = 0x8001
	CGetRQ    CommandField = 0x0010
	CGetRSP   CommandField = 0x8010
	CFindRQ   CommandField = 0x0020
	CFindRSP  CommandField = 0x8020
	CMoveRQ   CommandField = 0x0021
	CMoveRSP  CommandField = 0x8021
	CEchoRQ   CommandField = 0x0030
	CEchoRSP  CommandField = 0x8030
	CCancelRQ CommandField = 0x0FFF

	NEventReportRQ  CommandField = 0x0100
	NEventReportRSP CommandField = 0x8100
	NGetRQ          CommandField = 0x0110
	NGetRSP         CommandField = 0x8110
	NSetRQ          CommandField = 0x0120
	NSetRSP         CommandField = 0x8120
	NActionRQ       CommandField = 0x0130
	NActionRSP      CommandField = 0x8130
	NCreateRQ       CommandField = 0x0140
	NCreateRSP      CommandField = 0x8140
	NDeleteRQ       CommandField = 0x0150
	NDeleteRSP      CommandField = 0x8150
)

// responseBit is set in the Command Field of every response and clear in
// every request (PS3.7 E.1: each RSP value is its RQ value plus 8000H).
const responseBit CommandField = 0x8000

// String returns the PS3.7 name, e.g. "C-STORE-RQ", or the hex value for
// a command field the standard does not define.
func (c CommandField) String() string {
	if name := c.name(); name != "" {
		return name
	}
	return fmt.Sprintf("CommandField(0x%04X)", uint16(c))
}

// name is the PS3.7 E.1 name, or "" for a value the standard does not
// define. A switch rather than a map keeps the package free of globals.
func (c CommandField) name() string {
	switch c {
	case CStoreRQ:
		return "C-STORE-RQ"
	case CStoreRSP:
		return "C-STORE-RSP"
	case CGetRQ:
		return "C-GET-RQ"
	case CGetRSP:
		return "C-GET-RSP"
	case CFindRQ:
		return "C-FIND-RQ"
	case CFindRSP:
		return "C-FIND-RSP"
	case CMoveRQ:
		return "C-MOVE-RQ"
	case CMoveRSP:
		return "C-MOVE-RSP"
	case CEchoRQ:
		return "C-ECHO-RQ"
	case CEchoRSP:
		return "C-ECHO-RSP"
	case CCancelRQ:
		return "C-CANCEL-RQ"
	case NEventReportRQ:
		return "N-EVENT-REPORT-RQ"
	case NEventReportRSP:
		return "N-EVENT-REPORT-RSP"
	case NGetRQ:
		return "N-GET-RQ"
	case NGetRSP:
		return "N-GET-RSP"
	case NSetRQ:
		return "N-SET-RQ"
	case NSetRSP:
		return "N-SET-RSP"
	case NActionRQ:
		return "N-ACTION-RQ"
	case NActionRSP:
		return "N-ACTION-RSP"
	case NCreateRQ:
		return "N-CREATE-RQ"
	case NCreateRSP:
		return "N-CREATE-RSP"
	case NDeleteRQ:
		return "N-DELETE-RQ"
	case NDeleteRSP:
		return "N-DELETE-RSP"
	}
	return ""
}

// known reports whether PS3.7 E.1 defines this command field.
func (c CommandField) known() bool { return c.name() != "" }

// isRequest reports whether the command field is a request (RQ). It looks
// only at the response bit, so it also answers for values the standard
// does not define.
func (c CommandField) isRequest() bool { return c&responseBit == 0 }

// isResponse reports whether the command field is a response (RSP).
func (c CommandField) isResponse() bool { return !c.isRequest() }

// hasPriority reports whether the request's message table carries
// Priority (0000,0700): C-STORE-RQ (PS3.7 Table 9.3-1), C-FIND-RQ,
// C-GET-RQ and C-MOVE-RQ (PS3.7 9.3.2.1, 9.3.3.1, 9.3.4.1, from memory).
// C-ECHO-RQ (Table 9.3-12), C-CANCEL-RQ and the N-* requests have none.
func (c CommandField) hasPriority() bool {
	switch c {
	case CStoreRQ, CFindRQ, CGetRQ, CMoveRQ:
		return true
	}
	return false
}

// NoDataSet is the Command Data Set Type (0000,0800) value that says no
// data set follows the command set; any other value means one does
// (PS3.7 E.1, the CommandDataSetType row).
const NoDataSet uint16 = 0x0101

// DataSetPresent is the Command Data Set Type we send when a data set
// follows. The standard only requires "anything but 0101H"
// (PS3.7 Table 9.3-1); 0001H is common practice.
const DataSetPresent uint16 = 0x0001

// Priority is the value of Priority (0000,0700), PS3.7 Table 9.3-1.
type Priority uint16

// Priority values, PS3.7 Table 9.3-1.
const (
	PriorityMedium Priority = 0x0000
	PriorityHigh   Priority = 0x0001
	PriorityLow    Priority = 0x0002

	// Medium, High and Low are short spellings of the same values.
	Medium = PriorityMedium
	High   = PriorityHigh
	Low    = PriorityLow
)

// String returns "MEDIUM", "HIGH" or "LOW", the names PS3.7 Table 9.3-1
// uses, or the hex value for anything else.
func (p Priority) String() string {
	switch p {
	case PriorityMedium:
		return "MEDIUM"
	case PriorityHigh:
		return "HIGH"
	case PriorityLow:
		return "LOW"
	}
	return fmt.Sprintf("Priority(0x%04X)", uint16(p))
}

// valid reports whether p is one of the three values PS3.7 Table 9.3-1
// allows.
func (p Priority) valid() bool { return p <= PriorityLow }

// verificationSOPClassUID is the SOP Class of C-ECHO (PS3.4 A.4, PS3.6
// Annex A).
const verificationSOPClassUID = "1.2.840.10008.1.1"

// Command is a decoded DIMSE command set. One struct serves requests and
// responses; Encode writes only the elements the message tables of
// PS3.7 9.3 and Annex C give the command in CommandField, so fields that
// do not belong to it are ignored rather than sent.
type Command struct {
	// CommandField (0000,0100) US: the operation.
	CommandField CommandField
	// AffectedSOPClassUID (0000,0002) UI, encoded when non-empty.
	AffectedSOPClassUID string
	// MessageID (0000,0110) US, requests only (not C-CANCEL-RQ).
	MessageID uint16
	// MessageIDBeingRespondedTo (0000,0120) US, responses and C-CANCEL-RQ
	// (PS3.7 9.3.2.3 Table 9.3-5).
	MessageIDBeingRespondedTo uint16
	// MoveDestination (0000,0600) AE, C-MOVE-RQ only, encoded when
	// non-empty.
	MoveDestination string
	// MoveOriginatorAETitle (0000,1030) AE, requests only, encoded when
	// non-empty: set on a C-STORE-RQ that is a C-MOVE sub-operation.
	MoveOriginatorAETitle string
	// MoveOriginatorMessageID (0000,1031) US, encoded only together with
	// MoveOriginatorAETitle.
	MoveOriginatorMessageID uint16
	// Priority (0000,0700) US, encoded for C-STORE/FIND/GET/MOVE-RQ.
	Priority Priority
	// CommandDataSetType (0000,0800) US: NoDataSet, or anything else when
	// a data set follows.
	CommandDataSetType uint16
	// AffectedSOPInstanceUID (0000,1000) UI, encoded when non-empty.
	AffectedSOPInstanceUID string
	// Status (0000,0900) US, responses only.
	Status Status
	// OffendingElements (0000,0901) AT, responses only, encoded when
	// non-empty. Each tag is packed as group<<16 | element.
	OffendingElements []uint32
	// ErrorComment (0000,0902) LO, responses only, encoded when non-empty
	// after truncateComment.
	ErrorComment string
	// ErrorID (0000,0903) US, responses only, encoded when non-zero.
	ErrorID uint16
}

// HasDataSet reports whether a data set follows this command set
// (PS3.7 E.1, the CommandDataSetType row).
func (c *Command) HasDataSet() bool { return c.CommandDataSetType != NoDataSet }

// NewCEchoRQ returns a C-ECHO-RQ for the Verification SOP Class
// (PS3.7 Table 9.3-12).
func NewCEchoRQ(msgID uint16) *Command {
	return &Command{
		CommandField:        CEchoRQ,
		AffectedSOPClassUID: verificationSOPClassUID,
		MessageID:           msgID,
		CommandDataSetType:  NoDataSet,
	}
}

// NewCStoreRQ returns a C-STORE-RQ announcing one SOP instance
// (PS3.7 Table 9.3-1).
func NewCStoreRQ(msgID uint16, sopClassUID, sopInstanceUID string, prio Priority) *Command {
	return &Command{
		CommandField:           CStoreRQ,
		AffectedSOPClassUID:    sopClassUID,
		MessageID:              msgID,
		Priority:               prio,
		CommandDataSetType:     DataSetPresent,
		AffectedSOPInstanceUID: sopInstanceUID,
	}
}

// Response builds the response to request c: the RSP command field, the
// request's Message ID as Message ID Being Responded To, the same
// Affected SOP Class and Instance UIDs (PS3.7 Tables 9.3-2 and 9.3-13),
// no data set, and the given status and error comment (truncated with
// truncateComment). Calling it on a response or on C-CANCEL-RQ, which has
// no response, yields a command Encode refuses.
func (c *Command) Response(status Status, errorComment string) *Command {
	return &Command{
		CommandField:              c.CommandField | responseBit,
		AffectedSOPClassUID:       c.AffectedSOPClassUID,
		MessageIDBeingRespondedTo: c.MessageID,
		CommandDataSetType:        NoDataSet,
		AffectedSOPInstanceUID:    c.AffectedSOPInstanceUID,
		Status:                    status,
		ErrorComment:              truncateComment(errorComment),
	}
}
