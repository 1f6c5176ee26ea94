package scp

import (
	"testing"

	"dwiaudit/scp/pdu"
)

// Transfer syntax UIDs of PS3.6 Table A-1 used by the negotiation tests.
const (
	tsRLE         = "1.2.840.10008.1.2.5"
	tsJPEGBase    = "1.2.840.10008.1.2.4.50"
	tsJPEGExt     = "1.2.840.10008.1.2.4.51"
	tsJPEGLL      = "1.2.840.10008.1.2.4.57"
	tsJPEGLLSV1   = "1.2.840.10008.1.2.4.70"
	tsJPEGLS      = "1.2.840.10008.1.2.4.80"
	tsJPEGLSNear  = "1.2.840.10008.1.2.4.81"
	tsJ2KLossless = "1.2.840.10008.1.2.4.90"
	tsJ2K         = "1.2.840.10008.1.2.4.91"
	tsMPEG2       = "1.2.840.10008.1.2.4.100"
)

func TestNegotiatePrefersSyntaxesTheAuditDecodes(t *testing.T) {
	tests := []struct {
		name     string
		proposed []string
		want     string
		result   pdu.PCResult
	}{
		{"JPEG-LS is chosen over JPEG 2000 proposed first", []string{tsJ2KLossless, tsJPEGLS}, tsJPEGLS, pdu.PCAcceptance},
		{"lossy JPEG the audit decodes is chosen over lossless JPEG 2000", []string{tsJ2KLossless, tsJ2K, tsJPEGBase}, tsJPEGBase, pdu.PCAcceptance},
		{"lossless compression is chosen over lossy", []string{tsJPEGLSNear, tsJPEGExt, tsRLE}, tsRLE, pdu.PCAcceptance},
		{"JPEG Lossless SV1 is chosen over JPEG 2000", []string{tsJ2K, tsJPEGLLSV1}, tsJPEGLLSV1, pdu.PCAcceptance},
		{"uncompressed stays first of all", []string{tsJPEGLL, tsJ2K, ExplicitVRLittleEndian}, ExplicitVRLittleEndian, pdu.PCAcceptance},
		{"big endian, read natively, is chosen over JPEG 2000", []string{tsJ2KLossless, explicitVRBigEndian}, explicitVRBigEndian, pdu.PCAcceptance},
		{"JPEG 2000 alone is still accepted, to be stored", []string{tsJ2KLossless}, tsJ2KLossless, pdu.PCAcceptance},
		{"equal ranks keep the peer's order", []string{tsJPEGLL, tsJPEGLS}, tsJPEGLL, pdu.PCAcceptance},
		{"an unknown syntax alone is refused", []string{"1.2.3.4.5.6"}, ImplicitVRLittleEndian, pdu.PCTransferSyntaxesNotSupported},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := negotiate([]pdu.PresentationContextRQ{{ID: 1, AbstractSyntax: MRImageStorage, TransferSyntaxes: tc.proposed}},
				func(string) bool { return true })
			if len(got) != 1 || got[0].Result != tc.result || got[0].TransferSyntax != tc.want {
				t.Fatalf("negotiate(%v) = %+v, want result %d with %s", tc.proposed, got, tc.result, tc.want)
			}
			if tc.result == pdu.PCAcceptance && !Decodable(got[0].TransferSyntax) {
				for _, ts := range tc.proposed {
					if Decodable(ts) {
						t.Errorf("chose %s, which the audit cannot decode, over %s, which it can", got[0].TransferSyntax, ts)
					}
				}
			}
		})
	}
}

func TestDecodable(t *testing.T) {
	for ts, want := range map[string]bool{
		ExplicitVRLittleEndian: true, ImplicitVRLittleEndian: true, deflatedExplicitVRLittleEndian: true, explicitVRBigEndian: true,
		tsRLE: true, tsJPEGBase: true, tsJPEGExt: true, tsJPEGLL: true, tsJPEGLLSV1: true, tsJPEGLS: true, tsJPEGLSNear: true,
		tsJ2KLossless: false, tsJ2K: false, tsMPEG2: false,
	} {
		if got := Decodable(ts); got != want {
			t.Errorf("Decodable(%s) = %v, want %v", ts, got, want)
		}
	}
}
