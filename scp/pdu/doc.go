// Package pdu encodes and decodes the DICOM Upper Layer protocol data units
// of PS3.8 section 9.3: A-ASSOCIATE-RQ/AC/RJ, P-DATA-TF, A-RELEASE-RQ/RP and
// A-ABORT, including the user-information sub-items of PS3.8 Annex D and
// PS3.7 Annex D.3.3.
//
// The package knows nothing of the association state machine (package scp
// does that); it turns bytes into Go values and back, and it is the first
// code in dwiaudit that touches bytes from the network, so it is written to
// be bounded and to fail cleanly:
//
//   - Reader.Next checks the declared PDU length against a limit before it
//     allocates anything: maxAssociatePDULength for every PDU other than
//     P-DATA-TF, and the Maximum Length we advertised (PS3.8 D.1) for
//     P-DATA-TF. A longer PDU gives a *tooLongError.
//   - Every item and sub-item length is checked against what remains of the
//     enclosing PDU or item. A bad body gives a *parseError that carries the
//     A-ABORT reason (PS3.8 9.3.8 Table 9-26) the caller should send.
//   - Items and user-information sub-items of unrecognized types are skipped
//     (PS3.8 9.3.1 and D.2 Note 2).
//
// Receiving is tolerant where peers are known to differ and the standard
// leaves no doubt about the meaning: AE titles lose their leading and
// trailing spaces (PS3.8 9.3.2 Table 9-11: they are not significant) and any
// trailing NULs, and UIDs lose a trailing NUL or space (the PS3.5 padding
// some peers add although PS3.8 Annex F forbids it in items). Sending is
// strict: AE titles are space-padded to 16 bytes, UIDs are written without
// padding, and a value the standard does not allow is an error rather than
// something put on the wire.
//
// Decoded values are checked only as far as the structure needs; whether an
// AE title is known or an abstract syntax is supported is the caller's
// decision (CheckAETitle and checkUID help it decide), so that it can answer
// with an A-ASSOCIATE-RJ or a rejected presentation context instead of an
// abort.
//
// A P-DATA-TF returned by Reader.Next aliases the Reader's buffer and is
// valid only until the next call; every other PDU is a fresh value that the
// caller owns. Decode does the same for one PDU held in a byte slice. Write
// and Writer put each PDU on the wire with one Write call (Writer reusing
// its buffer, so a stream of P-DATA-TF costs no allocation), and
// AppendPDataHeader lets a sender place a data fragment directly behind its
// headers.
//
// The sentinel errors are documented together in errors.go.
package pdu
