package phantom

// Layout names how a study's diffusion encoding is written: the standard
// attributes of PS3.3 (classic or Enhanced MR), or one of the layouts the
// makers' scanners send, written from the makers' public descriptions so
// that the audit's readers of those layouts can be tested on files whose
// truth is known. Every layout images the same object with the same
// signal and noise (Options.Seed), so ADC results are comparable across
// layouts; only the header encoding and, for a mosaic, the pixel
// arrangement differ.
//
// The private blocks carry the makers' own private creator strings
// (PS3.5 7.8.1), because a reader finds a block by its creator, and
// Manufacturer (0008,0070) is the maker's, as its files carry it
// (Layout.manufacturer), because readers select a maker's elements by
// the manufacturer too (and Canon's layout has no private block to tell
// it by). Everything else about the scanner stays invented: institution,
// station, model, serial number, software.
type Layout string

// The layouts.
const (
	// LayoutStandard is one classic MR Image Storage file per image with
	// the MR Diffusion Macro's attributes at top level (the default).
	LayoutStandard Layout = "standard"
	// LayoutEnhanced is Enhanced MR Image Storage multi-frame instances
	// with the MR Diffusion Macro in the functional groups
	// (Options.MultiFrame).
	LayoutEnhanced Layout = "enhanced"
	// LayoutSiemensMosaic is classic MR images each holding every slice of
	// one volume tiled into one image (Image Type value MOSAIC), with the
	// diffusion encoding in the "SIEMENS CSA HEADER" image header
	// (0029,xx10) and the "SIEMENS MR HEADER" elements (0019,xx0A..0E);
	// no (0018,9087). See mosaic.go.
	LayoutSiemensMosaic Layout = "siemens-mosaic"
	// LayoutGE is classic MR images with the b-value in "GEMS_PARM_01"
	// (0043,xx39) (first value, offset by 10^9 as some software versions
	// write it) and the gradient in "GEMS_ACQU_01" (0019,xxBB/BC/BD); no
	// standard diffusion attributes. See makers.go.
	LayoutGE Layout = "ge"
	// LayoutPhilips is classic MR images with the b-value and direction
	// label in "Philips Imaging DD 001" (2001,xx03/04) and the gradient in
	// "Philips MR Imaging DD 001" (2005,xxB0/B1/B2), the scanner's trace
	// labelled "I"; no standard diffusion attributes. See makers.go.
	LayoutPhilips Layout = "philips"
	// LayoutCanon is classic MR images as described publicly for Canon
	// (formerly Toshiba) classic DICOM: (0018,9087) and the gradient only
	// on images with diffusion weighting, the b0 images carrying no
	// (0018,9087) at all, and the encoding repeated as text in Image
	// Comments. See makers.go.
	LayoutCanon Layout = "canon"
	// LayoutUIH is classic MR images with the b-value and gradient in the
	// UIH private group 0065 (0065,xx09/0A and xx37); no standard
	// diffusion attributes. See makers.go.
	LayoutUIH Layout = "uih"
)

type layoutInfo struct {
	name        Layout
	description string
}

// layoutTable lists the layouts in the order Layouts returns them.
func layoutTable() []layoutInfo {
	return []layoutInfo{
		{LayoutStandard, "classic MR images, one per file, standard MR Diffusion attributes (the default)"},
		{LayoutEnhanced, "Enhanced MR multi-frame instances, MR Diffusion Sequence per frame (same as --multiframe)"},
		{LayoutSiemensMosaic, "Siemens mosaic: each volume's slices tiled into one image, CSA header (0029,xx10) and (0019,xx0C/0D/0E)"},
		{LayoutGE, "GE: b-value in (0043,xx39) with a 10^9 offset, gradient in (0019,xxBB/BC/BD), no standard attributes"},
		{LayoutPhilips, "Philips: (2001,xx03) b-value, (2001,xx04) direction label, (2005,xxB0/B1/B2) gradient, trace labelled I"},
		{LayoutCanon, "Canon classic: (0018,9087) and the gradient only on weighted images, b0 without a b-value, Image Comments b=..."},
		{LayoutUIH, "UIH: b-value (0065,xx09/0A) and gradient (0065,xx37) in private group 0065, no standard attributes"},
	}
}

// Layouts returns every layout, the default first.
func Layouts() []Layout {
	table := layoutTable()
	out := make([]Layout, len(table))
	for i, l := range table {
		out[i] = l.name
	}
	return out
}

// Valid reports whether l is one of Layouts.
func (l Layout) Valid() bool {
	for _, x := range layoutTable() {
		if x.name == l {
			return true
		}
	}
	return false
}

// Description says in one line what the layout writes ("" for an unknown
// layout).
func (l Layout) Description() string {
	for _, x := range layoutTable() {
		if x.name == l {
			return x.description
		}
	}
	return ""
}

func (l Layout) String() string { return string(l) }

// manufacturer is Manufacturer (0008,0070) as the maker's scanners write
// it (from memory), "" for standard and enhanced, which keep the
// invented scanner's.
func (l Layout) manufacturer() string {
	switch l {
	case LayoutSiemensMosaic:
		return "SIEMENS"
	case LayoutGE:
		return "GE MEDICAL SYSTEMS"
	case LayoutPhilips:
		return "Philips Medical Systems"
	case LayoutCanon:
		return "CANON_MEC"
	case LayoutUIH:
		return "UIH"
	}
	return ""
}

// maker reports whether l is one of the makers' layouts (not standard or
// enhanced).
func (l Layout) maker() bool { return l != LayoutStandard && l != LayoutEnhanced }
