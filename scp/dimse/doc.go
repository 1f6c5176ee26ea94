// Package dimse encodes and decodes DIMSE command sets: the group 0000
// elements that open every DIMSE message a DICOM association carries
// (PS3.7 6.3), and the status codes a response sends back (PS3.7 Annex C).
//
// dwiaudit is a storage SCP, so the package is built around C-ECHO and
// C-STORE, but every DIMSE-C and DIMSE-N command field is known so that an
// unexpected request can still be decoded and refused with a proper
// status instead of an aborted association.
//
// Command sets are always Implicit VR Little Endian, whatever transfer
// syntax the presentation context negotiated for the data set that may
// follow (PS3.7 6.3.1). The low-level reading and writing goes through
// github.com/grailbio/go-dicom's dicomio; the element tags come from its
// dicomtag dictionary.
//
// The package does not do any I/O: Encode and Decode work on complete
// command sets that the association layer has already assembled from
// (or will split into) command PDVs (PS3.8 9.3.5.1).
//
// Errors: everything Decode and Encode return wraps one of the sentinel
// errors in errors.go and starts with "dimse: ". StatusOf is the single
// place where a Go error turns into the Status and Error Comment sent to
// the peer.
package dimse
