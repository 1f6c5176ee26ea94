package codec_test

import (
	"testing"

	"dwiaudit/audit/codec"
	"dwiaudit/scp"
)

// TestAcceptorKnowsWhatTheCodecDecodes keeps scp's list of decodable
// syntaxes (the network layer may not import the audit) equal to what
// this package decodes, over every encapsulated syntax of PS3.6 Table A-1
// that either names.
func TestAcceptorKnowsWhatTheCodecDecodes(t *testing.T) {
	for _, ts := range []string{
		codec.RLELossless, codec.JPEGBaseline, codec.JPEGExtended, codec.JPEGLossless, codec.JPEGLosslessSV1,
		codec.JPEGLSLossless, codec.JPEGLSNearLossless, codec.JPEG2000Lossless, codec.JPEG2000,
		"1.2.840.10008.1.2.4.92", "1.2.840.10008.1.2.4.93", "1.2.840.10008.1.2.4.100",
		"1.2.840.10008.1.2.4.102", "1.2.840.10008.1.2.4.201", "1.2.840.10008.1.2.4.203",
	} {
		if got, want := scp.Decodable(ts), codec.CanDecode(ts); got != want {
			t.Errorf("scp.Decodable(%s) = %v, codec.CanDecode = %v", codec.Name(ts), got, want)
		}
	}
}
