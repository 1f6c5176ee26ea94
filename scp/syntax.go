package scp

import (
	"strings"

	"github.com/suyashkumar/dicom/pkg/uid"

	"dwiaudit/scp/pdu"
)

// SOP classes (PS3.4 Annex B, PS3.6 Annex A).
const (
	VerificationSOPClass             = "1.2.840.10008.1.1"
	MRImageStorage                   = "1.2.840.10008.5.1.4.1.1.4"
	EnhancedMRImageStorage           = "1.2.840.10008.5.1.4.1.1.4.1"
	legacyConvertedEnhancedMRStorage = "1.2.840.10008.5.1.4.1.1.4.4"
	parametricMapStorage             = "1.2.840.10008.5.1.4.1.1.30"
	secondaryCaptureImageStorage     = "1.2.840.10008.5.1.4.1.1.7"

	// storageSOPClassRoot is the arc under which every storage SOP class
	// of PS3.4 Annex B sits (common practice relies on it; PS3.6 Annex A
	// lists them all there).
	storageSOPClassRoot = "1.2.840.10008.5.1.4.1.1."
)

// Transfer syntaxes (PS3.5 Section 10, PS3.6 Annex A).
const (
	ImplicitVRLittleEndian         = "1.2.840.10008.1.2"
	ExplicitVRLittleEndian         = "1.2.840.10008.1.2.1"
	deflatedExplicitVRLittleEndian = "1.2.840.10008.1.2.1.99"
	explicitVRBigEndian            = "1.2.840.10008.1.2.2"
)

// DefaultStorageSOPClasses are the storage SOP classes a diffusion audit
// needs: classic and enhanced MR, legacy converted enhanced MR, parametric
// maps (scanner ADC maps) and secondary capture.
var defaultStorageSOPClasses = []string{
	MRImageStorage,
	EnhancedMRImageStorage,
	legacyConvertedEnhancedMRStorage,
	parametricMapStorage,
	secondaryCaptureImageStorage,
}

// DefaultStorageSOPClasses returns a fresh copy of the storage SOP classes
// the acceptor takes when Server.AcceptAllStorage is false.
func DefaultStorageSOPClasses() []string {
	return append([]string(nil), defaultStorageSOPClasses...)
}

// isStorageSOPClass reports whether uid names a storage SOP class.
func isStorageSOPClass(uid string) bool {
	return strings.HasPrefix(uid, storageSOPClassRoot) && len(uid) > len(storageSOPClassRoot)
}

// Encapsulated transfer syntaxes whose pixel data the audit decodes
// (package audit/codec; PS3.6 Table A-1 UIDs). The network layer does not
// import the audit, so the list is kept here; a test in audit/codec checks
// that it names exactly the syntaxes that package decodes.
var decodableEncapsulated = map[string]bool{
	"1.2.840.10008.1.2.5":    true,  // RLE Lossless
	"1.2.840.10008.1.2.4.57": true,  // JPEG Lossless, Process 14
	"1.2.840.10008.1.2.4.70": true,  // JPEG Lossless, Process 14, Selection Value 1
	"1.2.840.10008.1.2.4.80": true,  // JPEG-LS Lossless
	"1.2.840.10008.1.2.4.81": false, // JPEG-LS Near-Lossless: decoded, lossy (ranked after the lossless ones)
	"1.2.840.10008.1.2.4.50": false, // JPEG Baseline: decoded, lossy
	"1.2.840.10008.1.2.4.51": false, // JPEG Extended: decoded, lossy
}

// Decodable reports whether the audit can read the pixel data of a data
// set in transfer syntax ts: the native syntaxes, and the encapsulated
// ones package audit/codec decodes.
func Decodable(ts string) bool {
	switch ts {
	case ExplicitVRLittleEndian, ImplicitVRLittleEndian, deflatedExplicitVRLittleEndian, explicitVRBigEndian:
		return true
	}
	_, ok := decodableEncapsulated[ts]
	return ok
}

// transferSyntaxRank orders the transfer syntaxes the acceptor prefers;
// lower is better. The uncompressed little-endian syntaxes come first
// because the audit can read them without decoding; deflated and big
// endian follow; then the encapsulated syntaxes the audit decodes,
// lossless before lossy; other encapsulated syntaxes known to the
// data-set library are taken last, stored as received, and reported by
// the audit as not decodable. So the acceptor never picks a syntax the
// audit cannot decode when the peer proposes one it can. Zero means "not
// acceptable".
func transferSyntaxRank(ts string) int {
	switch ts {
	case ExplicitVRLittleEndian:
		return 1
	case ImplicitVRLittleEndian:
		return 2
	case deflatedExplicitVRLittleEndian:
		return 3
	case explicitVRBigEndian:
		return 4
	}
	lossless, decodable := decodableEncapsulated[ts]
	switch {
	case !knownTransferSyntax(ts):
		return 0
	case decodable && lossless:
		return 5
	case decodable:
		return 6
	}
	return 7
}

// knownTransferSyntax reports whether the data-set library
// (github.com/suyashkumar/dicom) knows ts as a transfer syntax. Its parser
// panics on transfer syntaxes it does not know, so only data sets in a
// known syntax may ever reach it.
func knownTransferSyntax(ts string) bool {
	_, err := uid.CanonicalTransferSyntaxUID(ts)
	return err == nil
}

// negotiate answers each proposed presentation context (PS3.8 9.3.3.2,
// Table 9-18 result values). accept says whether an abstract syntax is
// supported. For an accepted context the best-ranked proposed transfer
// syntax is chosen; ties keep the peer's order.
func negotiate(proposed []pdu.PresentationContextRQ, accept func(abstract string) bool) []pdu.PresentationContextAC {
	out := make([]pdu.PresentationContextAC, 0, len(proposed))
	for _, pc := range proposed {
		ac := pdu.PresentationContextAC{ID: pc.ID}
		if !accept(pc.AbstractSyntax) {
			ac.Result = pdu.PCAbstractSyntaxNotSupported
			// PS3.8 9.3.3.2: the transfer syntax sub-item is not
			// significant when the context is not accepted; we send the
			// default transfer syntax so the item is well formed.
			ac.TransferSyntax = ImplicitVRLittleEndian
			out = append(out, ac)
			continue
		}
		best, bestRank := "", 0
		for _, ts := range pc.TransferSyntaxes {
			if r := transferSyntaxRank(ts); r != 0 && (bestRank == 0 || r < bestRank) {
				best, bestRank = ts, r
			}
		}
		if bestRank == 0 {
			ac.Result = pdu.PCTransferSyntaxesNotSupported
			ac.TransferSyntax = ImplicitVRLittleEndian
		} else {
			ac.Result = pdu.PCAcceptance
			ac.TransferSyntax = best
		}
		out = append(out, ac)
	}
	return out
}
