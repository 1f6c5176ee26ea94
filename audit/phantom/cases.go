package phantom

// Case names a synthetic study: a clean one, or one with a single planted
// defect. The names are our own (kebab-case), used on the command line
// and in test names.
type Case string

// The cases. Each plants one defect in an otherwise clean study; Truth
// records where.
const (
	CaseClean              Case = "clean"
	CaseNoB0               Case = "no-b0"
	CaseBValueSetDiffers   Case = "bvalue-set-differs"
	CaseBValueHeaderWrong  Case = "bvalue-header-wrong"
	CaseB0ArtifactAliasing Case = "b0-artifact-aliasing"
	CaseB0ArtifactDropout  Case = "b0-artifact-dropout"
	CaseRestrictionLesion  Case = "restriction-lesion"
	CaseT2ShineThrough     Case = "t2-shine-through"
	CaseMissingSlices      Case = "missing-slices"
	CaseSlicePositions     Case = "slice-positions-differ"
	CaseScannerADCCorrect  Case = "scanner-adc-correct"
	CaseScannerADCScaled   Case = "scanner-adc-misscaled"
	CaseLowSNR             Case = "low-snr"
	CaseIceWater0C         Case = "ice-water-0c"
	CaseIceWaterWarm       Case = "ice-water-warm"
)

// caseInfo is what the code needs to know about a case besides its name.
type caseInfo struct {
	name        Case
	description string
}

// caseTable lists the cases in the order Cases returns them (a function,
// not a package variable, so nothing can change it).
func caseTable() []caseInfo {
	return []caseInfo{
		{CaseClean, "digital brain, b0 and b1000 along 3 directions plus trace; no defect"},
		{CaseNoB0, "no image at the protocol's lowest b-value (no b0)"},
		{CaseBValueSetDiffers, "highest b-value acquired and labelled 800 where the protocol says 1000"},
		{CaseBValueHeaderWrong, "header says b = 1000 but the weighting applied was b = 700"},
		{CaseB0ArtifactAliasing, "aliased (wrapped-in) signal added to the b0 only, in a few central slices"},
		{CaseB0ArtifactDropout, "signal loss (x0.6) on the b0 only, in a few central slices; mimics restriction on ADC"},
		{CaseRestrictionLesion, "true restriction: lesion with low ADC (0.4e-3), bright DWI, b0 about normal"},
		{CaseT2ShineThrough, "T2 shine-through: lesion bright on b0 and DWI, ADC normal"},
		{CaseMissingSlices, "two central slices missing from one diffusion direction"},
		{CaseSlicePositions, "b0 in its own series, shifted half a slice from the DWI slice positions"},
		{CaseScannerADCCorrect, "adds the scanner's ADC map, Real World Value Mapping correct (1e-6 mm2/s per unit)"},
		{CaseScannerADCScaled, "adds the scanner's ADC map, Real World Value Mapping wrong by a factor 10"},
		{CaseLowSNR, "b0 SNR about 4 in white matter instead of 60"},
		{CaseIceWater0C, "ice-water phantom at 0 C (ADC 1.10e-3 mm2/s)"},
		{CaseIceWaterWarm, "ice-water phantom not at equilibrium, water at 4 C (ADC 1.26e-3 mm2/s)"},
	}
}

// Cases returns every case, clean first.
func Cases() []Case {
	table := caseTable()
	out := make([]Case, len(table))
	for i, c := range table {
		out[i] = c.name
	}
	return out
}

// Description is a one-line description of the case, "" for an unknown
// one.
func (c Case) Description() string {
	for _, ci := range caseTable() {
		if ci.name == c {
			return ci.description
		}
	}
	return ""
}

// Valid reports whether c is one of Cases().
func (c Case) Valid() bool { return c.Description() != "" }

// String returns the case name.
func (c Case) String() string { return string(c) }

// iceWater reports whether the case images the ice-water phantom instead
// of the brain.
func (c Case) iceWater() bool { return c == CaseIceWater0C || c == CaseIceWaterWarm }

// lesion reports whether the case puts a lesion in the brain.
func (c Case) lesion() bool { return c == CaseRestrictionLesion || c == CaseT2ShineThrough }

// b0Artifact reports whether the case corrupts the b0 alone.
func (c Case) b0Artifact() bool { return c == CaseB0ArtifactAliasing || c == CaseB0ArtifactDropout }

// scannerADC reports whether the study carries a scanner-made ADC map.
func (c Case) scannerADC() bool { return c == CaseScannerADCCorrect || c == CaseScannerADCScaled }
