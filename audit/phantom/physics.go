package phantom

import "math"

// Diffusion of free water against temperature: Holz, Heil & Sacco, PCCP
// 2000;2:4740, the fit D = D0 (T/Ts - 1)^gamma quoted in docs/references.md#holz-2000.
const (
	holzD0    = 1.635e-8 // m^2/s
	holzTs    = 215.05   // K
	holzGamma = 2.063
	kelvin    = 273.15 // 0 C in K
	m2ToMM2   = 1e6    // 1 m^2/s = 1e6 mm^2/s
)

// WaterADC is the self-diffusion coefficient of pure water at celsius
// degrees, in mm^2/s, from the Holz 2000 fit (docs/references.md#water-diffusion): 1.099e-3 at
// 0 C, 2.023e-3 at 20 C, 3.037e-3 at 37 C. The fit was made on
// measurements from 0 C to 100 C (from memory); it returns NaN at or below
// its singular temperature Ts (about -58 C).
func WaterADC(celsius float64) float64 {
	x := (celsius+kelvin)/holzTs - 1
	if !(x > 0) {
		return math.NaN()
	}
	return holzD0 * math.Pow(x, holzGamma) * m2ToMM2
}

// Tissue ADC values of the digital brain, mm^2/s.
const (
	// ADCWhiteMatter is normal white matter, 0.70e-3 (Helenius et al.,
	// AJNR 2002;23:194, 1.5 T, b 0/1000; docs/references.md#helenius-2002).
	ADCWhiteMatter = 0.70e-3
	// ADCGreyMatter is cortical grey matter, 0.89e-3 (Helenius 2002;
	// docs/references.md#helenius-2002).
	ADCGreyMatter = 0.89e-3
	// ADCCSF is cerebrospinal fluid, close to free water at body
	// temperature: WaterADC(37) = 3.04e-3 (Holz 2000), histogram peak
	// about 3.2e-3 (AJNR 2000;21:1078); both in docs/references.md#csf-histogram-ajnr-2000. We use 3.0e-3.
	ADCCSF = 3.0e-3
	// ADCRestriction is the restriction lesion, 0.4e-3: invented for the
	// demo, well below normal white matter as in acute ischaemia.
	ADCRestriction = 0.4e-3
	// ADCShineThrough is the T2 shine-through lesion, 0.80e-3: invented,
	// inside the normal parenchyma range 0.6-1.1e-3 (docs/references.md#parenchyma-range) so that
	// only its T2 (S0) is abnormal.
	ADCShineThrough = 0.80e-3
	// ADCScalpFat is the bright shell of scalp fat, 0.05e-3: invented (fat
	// barely diffuses, common practice); it makes the skull ring bright on
	// every image and dark on ADC, which the audit's tissue mask must
	// exclude.
	ADCScalpFat = 0.05e-3
)

// White-matter anisotropy, used when Options.Anisotropic is set: the
// diffusion tensor of white matter is diagonal in patient axes with fibres
// running left-right (as in the corpus callosum). The values are invented;
// their mean is ADCWhiteMatter, so the trace ADC (mean diagonal) of white
// matter is unchanged.
const (
	wmAxialD  = 1.00e-3 // along x (patient left-right)
	wmRadialD = 0.55e-3 // along y and z
)

// Noiseless b0 signal (T2-weighted, S0) per tissue, in stored pixel units.
// All invented relative values with the contrast of a T2-weighted EPI b0:
// CSF brightest, grey matter above white matter.
const (
	S0WhiteMatter  = 600.0
	S0GreyMatter   = 800.0
	S0CSF          = 2000.0
	S0Restriction  = 700.0  // about normal (a little above white matter)
	S0ShineThrough = 1800.0 // long T2: bright on b0
	S0ScalpFat     = 900.0  // incomplete fat suppression
	S0Water        = 1800.0 // the ice-water phantom's water
)

// The ice-water phantom's temperatures.
const (
	// IceWaterC is the QIBA ice-water phantom at equilibrium, 0 C: ADC
	// 1.1e-3 mm^2/s at isocentre (QIBA DWI profile; Malyarenko et al.,
	// JMRI 2013;37:1238; docs/references.md#malyarenko-2013); WaterADC(0) = 1.099e-3.
	IceWaterC = 0.0
	// IceWarmC is the "too warm" phantom: water at 4 C (invented, a
	// phantom scanned before the ice bath settled), ADC 1.26e-3, +15%,
	// far outside the QIBA tolerance of +-3.6% (from memory, docs/references.md#phantom-tolerance).
	IceWarmC = 4.0
)

// signal is the mono-exponential model S(b) = S0 exp(-b g^T D g) for a
// diagonal tensor d and unit gradient g (docs/references.md#mono-exponential: S(b) = S0 exp(-b
// ADC)); with an isotropic tensor it is S0 exp(-b ADC) along every
// direction. The zero g stands for the isotropic (trace) weighting,
// S0 exp(-b Tr(D)/3), which is also the geometric mean of three orthogonal
// directions (Basser & Pierpaoli; docs/references.md#basser-pierpaoli).
func signal(s0, b float64, d [3]float64, g [3]float64) float64 {
	if g == ([3]float64{}) {
		return s0 * math.Exp(-b*(d[0]+d[1]+d[2])/3)
	}
	return s0 * math.Exp(-b*(g[0]*g[0]*d[0]+g[1]*g[1]*d[1]+g[2]*g[2]*d[2]))
}

// rician returns the magnitude of a complex signal s + n1 + i n2 with
// Gaussian n1, n2 of standard deviation sigma: the Rician noise of
// magnitude MR images (Gudbjartsson & Patz, MRM 1995;34:910; docs/references.md#gudbjartsson-patz-1995).
// n1 and n2 are standard normal draws.
func rician(s, sigma, n1, n2 float64) float64 {
	return math.Hypot(s+sigma*n1, sigma*n2)
}
