package part10

import "fmt"

// Our implementation's identity, written into (0002,0012) and (0002,0013)
// when a Meta leaves them empty (PS3.7 D.3.3.2 defines both; PS3.10 7.1
// requires the class UID in every file).
const (
	// ImplementationClassUID is a UUID-derived UID (PS3.5 B.2). It was made
	// once, by hand, from a random (version 4) UUID,
	// 042adbdc-9c99-4d24-95c4-0a48684c1da3, written as the decimal value of
	// its 128 bits after the "2.25." root, and is fixed from then on: peers
	// log it to tell which implementation wrote a file or opened an
	// association, so it must not change from build to build.
	ImplementationClassUID = "2.25.5539447777562070585615222628860829091"

	// ImplementationVersionName names this release of the implementation.
	// SH, at most 16 characters (PS3.5 6.2).
	ImplementationVersionName = "DWIAUDIT_010"
)

// Layout of the envelope (PS3.10 7.1).
const (
	// preambleLength is the size of the File Preamble.
	preambleLength = 128
	// prefix is the DICOM Prefix that follows the preamble.
	prefix = "DICM"
	// headerStart is the offset of the first File Meta Element.
	headerStart = preambleLength + 4 // + len(Prefix), kept untyped
)

// Limits on what ReadMeta accepts. Every length read from a file is checked
// against one of them before anything is allocated for it.
const (
	// maxValueLength caps the value of any File Meta Element that is not
	// binary. The longest text values group 0002 defines are UIs (64 bytes,
	// PS3.5 6.2) and the UR presentation addresses; 1 KiB holds all of them
	// with room for sloppy writers, and no more can be legitimate.
	maxValueLength = 1 << 10

	// maxBinaryValueLength caps OB/OW/UN values: Private Information
	// (0002,0102) is OB of no set size, and the real-time video elements
	// are OB. 64 KiB is far above anything seen in practice (common
	// practice) while keeping one hostile file to a small allocation.
	maxBinaryValueLength = 64 << 10

	// maxMetaLength caps the whole File Meta Information after (0002,0000):
	// room for two maximal binary elements plus all the text ones.
	maxMetaLength = 2*maxBinaryValueLength + 64*maxValueLength

	// lookahead is how many bytes ReadMeta peeks to see whether the next
	// element is still in group 0002: the group number is the first two
	// bytes of a tag (PS3.5 7.1.2).
	lookahead = 2
)

// Tags of the File Meta Elements this package names (PS3.10 7.1 Table 7.1-1).
const (
	TagGroupLength                  Tag = 0x00020000
	TagFileMetaInformationVersion   Tag = 0x00020001
	TagMediaStorageSOPClassUID      Tag = 0x00020002
	TagMediaStorageSOPInstanceUID   Tag = 0x00020003
	TagTransferSyntaxUID            Tag = 0x00020010
	TagImplementationClassUID       Tag = 0x00020012
	TagImplementationVersionName    Tag = 0x00020013
	TagSourceApplicationEntityTitle Tag = 0x00020016
)

// metaGroup is the group number of the File Meta Information.
const metaGroup = 0x0002

// Tag is a data element tag, group in the high 16 bits.
type Tag uint32

// group returns the group number.
func (t Tag) group() uint16 { return uint16(t >> 16) }

// element returns the element number.
func (t Tag) element() uint16 { return uint16(t) }

// String formats the tag the way the standard prints it, "(0002,0010)".
func (t Tag) String() string { return fmt.Sprintf("(%04X,%04X)", t.group(), t.element()) }

// Element is one File Meta Element that Meta has no field for, kept raw so
// that a file can be rewritten without losing it.
type Element struct {
	Tag   Tag
	VR    string // two upper-case letters, e.g. "OB"
	Value []byte // as stored, padding included
}

// Meta is the File Meta Information of one Part 10 file (PS3.10 7.1 Table
// 7.1-1). Strings are held without their padding.
type Meta struct {
	MediaStorageSOPClassUID      string // (0002,0002)
	MediaStorageSOPInstanceUID   string // (0002,0003)
	TransferSyntaxUID            string // (0002,0010)
	ImplementationClassUID       string // (0002,0012)
	ImplementationVersionName    string // (0002,0013)
	SourceApplicationEntityTitle string // (0002,0016)

	// Other holds, in file order, every other element of group 0002 that
	// was read, File Meta Information Version (0002,0001) included, but not
	// the group length. WriteHeader writes them back, except the ones it
	// always makes itself.
	Other []Element
}
