package phantom

import "math"

// Tissue labels of Truth.Labels.
const (
	LabelBackground = 0 // air outside the object: noise only
	LabelWM         = 1 // white matter
	LabelGM         = 2 // grey matter (cortex)
	LabelCSF        = 3 // ventricles, sulci and the subarachnoid space
	LabelLesion     = 4 // the planted lesion (restriction or T2 shine-through)
	LabelWater      = 5 // the ice-water phantom's water
	LabelArtifact   = 6 // where a planted b0 artifact changes the b0 by more than artifactLabelFraction
	LabelScalp      = 7 // scalp fat: the bright skull ring
	LabelSolid      = 8 // skull bone or the phantom's container wall: no MR signal
)

// The digital head, in patient millimetres (LPS, PS3.3 C.7.6.2.1.1),
// centred on the isocentre in-plane. Sizes are invented, of an adult head
// (about 150 mm wide and 180 mm long, common practice).
const (
	headSemiX   = 72.0  // left-right semi-axis
	headSemiY   = 90.0  // anterior-posterior semi-axis
	headSemiZ   = 75.0  // foot-head semi-axis
	headCentreZ = -10.0 // the head's centre lies below isocentre, so the top slices cut smaller ellipses

	// Shells, as fractions of the head's normalised radius.
	scalpInner = 0.955 // scalp fat from here to 1
	brainOuter = 0.89  // skull bone between brainOuter and scalpInner

	// Inside the brain, as fractions of its normalised radius.
	subarachnoidInner = 0.95 // CSF from here to the skull
	cortexInner       = 0.83 // grey matter from here to subarachnoidInner
	sulcusInner       = 0.86 // sulci cut the cortex from here out
	sulcusCount       = 14   // sulci around the brain
	sulcusWidth       = 0.93 // a sulcus where cos(sulcusCount*theta) exceeds this (about 3 mm wide)

	// Lateral ventricles: two ellipsoids either side of the midline.
	ventricleX, ventricleY, ventricleZ = 10.0, -5.0, 8.0 // centre (x is +-)
	ventricleSemiX                     = 6.0
	ventricleSemiY                     = 26.0
	ventricleSemiZ                     = 13.0

	// The lesion: a sphere in the right hemisphere's white matter, on the
	// central slices.
	lesionX, lesionY, lesionZ = -30.0, 0.0, 0.0
	lesionRadius              = 10.0

	// Receive-coil shading: S0 rises by coilGain at coilRadius from the
	// centre, as a head array is brighter near its elements (invented
	// magnitude, common practice). It changes S0, never the ADC.
	coilGain   = 0.10
	coilRadius = 120.0
)

// The ice-water phantom: a cylinder along z (QIBA-style, sizes invented).
const (
	cylinderRadius = 85.0  // water
	cylinderWall   = 4.0   // container wall, no signal
	cylinderHalfZ  = 150.0 // longer than any slab we image
)

// voxel is what the object holds at one point.
type voxel struct {
	label uint8
	s0    float64    // noiseless b0 signal, coil shading included
	d     [3]float64 // diagonal diffusion tensor in patient axes, mm^2/s
}

func isotropic(adc float64) [3]float64 { return [3]float64{adc, adc, adc} }

// anatomy is the imaged object of one case.
type anatomy struct {
	iceWater    bool
	waterADC    float64 // for the ice-water phantom
	lesion      Case    // "", CaseRestrictionLesion or CaseT2ShineThrough
	anisotropic bool    // white matter tensor wmAxialD/wmRadialD instead of isotropic
}

func newAnatomy(c Case, anisotropic bool) anatomy {
	a := anatomy{anisotropic: anisotropic}
	switch {
	case c == CaseIceWater0C:
		a.iceWater, a.waterADC = true, WaterADC(IceWaterC)
	case c == CaseIceWaterWarm:
		a.iceWater, a.waterADC = true, WaterADC(IceWarmC)
	case c.lesion():
		a.lesion = c
	}
	return a
}

// coil is the receive-coil shading factor at (x, y).
func coil(x, y float64) float64 {
	return 1 + coilGain*(x*x+y*y)/(coilRadius*coilRadius)
}

// at is the object at patient position (x, y, z) mm.
func (a anatomy) at(x, y, z float64) voxel {
	if a.iceWater {
		return a.cylinder(x, y, z)
	}
	return a.brain(x, y, z)
}

func (a anatomy) cylinder(x, y, z float64) voxel {
	r := math.Hypot(x, y)
	switch {
	case math.Abs(z) > cylinderHalfZ || r >= cylinderRadius+cylinderWall:
		return voxel{label: LabelBackground}
	case r >= cylinderRadius:
		return voxel{label: LabelSolid}
	}
	return voxel{label: LabelWater, s0: S0Water * coil(x, y), d: isotropic(a.waterADC)}
}

func (a anatomy) brain(x, y, z float64) voxel {
	u, v, w := x/headSemiX, y/headSemiY, (z-headCentreZ)/headSemiZ
	r := math.Sqrt(u*u + v*v + w*w)
	shade := coil(x, y)
	switch {
	case r >= 1:
		return voxel{label: LabelBackground}
	case r >= scalpInner:
		return voxel{label: LabelScalp, s0: S0ScalpFat * shade, d: isotropic(ADCScalpFat)}
	case r >= brainOuter:
		return voxel{label: LabelSolid}
	}
	if a.lesion != "" {
		dx, dy, dz := x-lesionX, y-lesionY, z-lesionZ
		if dx*dx+dy*dy+dz*dz < lesionRadius*lesionRadius {
			if a.lesion == CaseRestrictionLesion {
				return voxel{label: LabelLesion, s0: S0Restriction * shade, d: isotropic(ADCRestriction)}
			}
			return voxel{label: LabelLesion, s0: S0ShineThrough * shade, d: isotropic(ADCShineThrough)}
		}
	}
	csf := voxel{label: LabelCSF, s0: S0CSF * shade, d: isotropic(ADCCSF)}
	rb := r / brainOuter
	if rb >= subarachnoidInner {
		return csf
	}
	if rb >= sulcusInner && math.Cos(sulcusCount*math.Atan2(v, u)) > sulcusWidth {
		return csf
	}
	if rb >= cortexInner {
		return voxel{label: LabelGM, s0: S0GreyMatter * shade, d: isotropic(ADCGreyMatter)}
	}
	for _, side := range [2]float64{-1, 1} {
		du := (x - side*ventricleX) / ventricleSemiX
		dv := (y - ventricleY) / ventricleSemiY
		dw := (z - ventricleZ) / ventricleSemiZ
		if du*du+dv*dv+dw*dw < 1 {
			return csf
		}
	}
	wm := voxel{label: LabelWM, s0: S0WhiteMatter * shade, d: isotropic(ADCWhiteMatter)}
	if a.anisotropic {
		wm.d = [3]float64{wmAxialD, wmRadialD, wmRadialD}
	}
	return wm
}
