package synth

import (
	"math/big"
	"math/rand/v2"
)

// uidRoot is the root for UUID-derived UIDs (PS3.5 B.2).
const uidRoot = "2.25."

// NewUID returns a UUID-derived UID (PS3.5 B.2): "2.25." and the decimal
// value of a version 4 (random) UUID drawn from rnd (RFC 9562 5.4, from memory: version
// nibble 0100, variant bits 10). The decimal has at most 39 digits and no
// leading zero, so the UID has at most 44 characters, within the 64 of UI
// (PS3.5 9.1). The same rnd state gives the same UID, which is what makes
// WriteSeries deterministic; it is not a source of uniqueness across seeds
// that collide.
func NewUID(rnd *rand.Rand) string {
	var b [16]byte
	hi, lo := rnd.Uint64(), rnd.Uint64()
	for i := 0; i < 8; i++ {
		b[i] = byte(hi >> (56 - 8*i))
		b[8+i] = byte(lo >> (56 - 8*i))
	}
	b[6] = b[6]&0x0F | 0x40 // version 4
	b[8] = b[8]&0x3F | 0x80 // variant 10
	return uidRoot + new(big.Int).SetBytes(b[:]).String()
}
