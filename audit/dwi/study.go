package dwi

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strings"
)

// IsDiffusion says whether a series' images are diffusion weighted or
// maps derived from them: some image has a b-value or a Diffusion
// Directionality, is a scanner ADC, eADC or anisotropy map, or says
// DIFFUSION in Acquisition Contrast (PS3.3 C.8.13.3.1.2) or in Image Type
// / Frame Type (value 3 of Enhanced MR, C.8.13.1.1.1; PS3.17's
// DERIVED\PRIMARY\DIFFUSION\ADC).
func IsDiffusion(frames []Frame) bool {
	for i := range frames {
		if isDiffusion(&frames[i]) {
			return true
		}
	}
	return false
}

func isDiffusion(f *Frame) bool {
	if f.HasBValue || f.Directionality != DirectionalityUnknown || f.Kind != KindAcquired {
		return true
	}
	if strings.EqualFold(f.AcquisitionContrast, "DIFFUSION") {
		return true
	}
	for _, v := range f.ImageType {
		if strings.EqualFold(v, "DIFFUSION") {
			return true
		}
	}
	return false
}

// AssembleStudy assembles every diffusion series of one study (others
// are left out) and links series that belong together:
//
//   - a series without a b0 (no volume at b within tol.BValue of 0)
//     borrows the b0 volume of another series of the study with the same
//     Frame of Reference UID whose every b0 slice lies on its grid with
//     the same geometry (Facts.B0FromSeries); series with a b0 that does
//     not fit are listed in Facts.B0Unmatched. A series holding only b0
//     is preferred as the donor, then the lowest series number.
//   - a series made only of maps the audit does not use (FA, colour FA,
//     tensor b0) is listed in Study.Derived with its kind;
//   - a series holding only scanner maps is attached to the diffusion
//     series whose frame of reference and grid its every slice matches
//     (Series.Maps), and is kept as a series of its own when none does.
//
// A series that cannot be assembled is listed in Study.Failed with its
// error; the others are still assembled. The returned error is for input
// that is not one study at all (ErrNoImages, ErrMixedSeries,
// ErrInvalidOptions). The Study points into frames.
func AssembleStudy(frames []Frame, tol Tolerances) (*Study, error) {
	if err := tol.Validate(); err != nil {
		return nil, err
	}
	if len(frames) == 0 {
		return nil, ErrNoImages
	}
	st := &Study{StudyInstanceUID: frames[0].StudyInstanceUID}
	bySeries := map[string][]*Frame{}
	var order []string
	for i := range frames {
		f := &frames[i]
		if f.StudyInstanceUID != st.StudyInstanceUID {
			return nil, fmt.Errorf("%w: studies %s and %s", ErrMixedSeries, st.StudyInstanceUID, f.StudyInstanceUID)
		}
		if _, ok := bySeries[f.SeriesInstanceUID]; !ok {
			order = append(order, f.SeriesInstanceUID)
		}
		bySeries[f.SeriesInstanceUID] = append(bySeries[f.SeriesInstanceUID], f)
	}
	slices.SortStableFunc(order, func(a, b string) int {
		return cmp.Or(cmp.Compare(bySeries[a][0].SeriesNumber, bySeries[b][0].SeriesNumber), strings.Compare(a, b))
	})

	var mapOnly []*Series
	for _, uid := range order {
		fs := bySeries[uid]
		if !slices.ContainsFunc(fs, isDiffusion) {
			continue
		}
		if !slices.ContainsFunc(fs, func(f *Frame) bool { return f.Kind.Audited() }) {
			st.Derived = append(st.Derived, derivedSeries(fs))
			continue
		}
		s, err := assembleSeries(fs, tol)
		if err != nil {
			st.Failed = append(st.Failed, &SeriesError{SeriesInstanceUID: uid, SeriesNumber: fs[0].SeriesNumber, Err: err})
			continue
		}
		if len(s.Volumes) == 0 {
			mapOnly = append(mapOnly, s)
			continue
		}
		st.Series = append(st.Series, s)
	}

	borrowB0(st.Series, tol)
	for _, m := range mapOnly {
		if !attachMaps(m, st.Series, tol) {
			st.Series = append(st.Series, m)
		}
	}
	slices.SortStableFunc(st.Series, func(a, b *Series) int {
		return cmp.Or(cmp.Compare(a.SeriesNumber, b.SeriesNumber), strings.Compare(a.SeriesInstanceUID, b.SeriesInstanceUID))
	})
	return st, nil
}

// derivedSeries describes a series of derived maps by the kind most of
// its images are (the lower kind of a tie).
func derivedSeries(fs []*Frame) DerivedSeries {
	count := map[MapKind]int{}
	for _, f := range fs {
		count[f.Kind]++
	}
	kind, n := KindOtherDerived, 0
	for k, c := range count {
		if c > n || c == n && k < kind {
			kind, n = k, c
		}
	}
	return DerivedSeries{SeriesInstanceUID: fs[0].SeriesInstanceUID, SeriesNumber: fs[0].SeriesNumber,
		SeriesDescription: fs[0].SeriesDescription, Kind: kind, Images: len(fs)}
}

// b0Of is a series' own b0 volume, nil when it has none.
func b0Of(s *Series, tol Tolerances) *Volume {
	for _, v := range s.Volumes {
		if v.Kind == KindAcquired && v.Isotropic && v.BValue <= tol.BValue && v.SeriesUID == s.SeriesInstanceUID {
			return v
		}
	}
	return nil
}

func borrowB0(series []*Series, tol Tolerances) {
	// Donors are chosen from the series' own b0 volumes, taken before any
	// borrowing, b0-only series first.
	type donor struct {
		s  *Series
		b0 *Volume
	}
	var donors []donor
	for _, s := range series {
		if v := b0Of(s, tol); v != nil {
			donors = append(donors, donor{s, v})
		}
	}
	slices.SortStableFunc(donors, func(a, b donor) int {
		return cmp.Or(-cmpBool(len(a.s.Volumes) == 1, len(b.s.Volumes) == 1), cmp.Compare(a.s.SeriesNumber, b.s.SeriesNumber))
	})
	for _, s := range series {
		if b0Of(s, tol) != nil {
			continue
		}
		for _, d := range donors {
			if d.s == s || !sameFrameOfReference(s, d.b0) {
				continue
			}
			v, ok := refit(d.b0, s, tol)
			if !ok {
				s.Facts.B0Unmatched = append(s.Facts.B0Unmatched, d.s.SeriesInstanceUID)
				continue
			}
			s.Volumes = append([]*Volume{v}, s.Volumes...)
			s.Facts.B0FromSeries = d.s.SeriesInstanceUID
			s.Facts.Encapsulated = s.Facts.Encapsulated || d.s.Facts.Encapsulated
			s.refresh(tol)
			break
		}
	}
}

// attachMaps moves the maps of a map-only series m to the first series
// they fit, and says whether there was one.
func attachMaps(m *Series, series []*Series, tol Tolerances) bool {
	for _, s := range series {
		if len(m.Maps) == 0 || !sameFrameOfReference(s, m.Maps[0]) {
			continue
		}
		fitted := make([]*Volume, 0, len(m.Maps))
		for _, v := range m.Maps {
			fv, ok := refit(v, s, tol)
			if !ok {
				break
			}
			fitted = append(fitted, fv)
		}
		if len(fitted) != len(m.Maps) {
			continue
		}
		s.Maps = append(s.Maps, fitted...)
		s.Facts.Encapsulated = s.Facts.Encapsulated || m.Facts.Encapsulated
		s.refresh(tol)
		return true
	}
	return false
}

// sameFrameOfReference says whether a volume's images share the series'
// Frame of Reference UID (PS3.3 C.7.4.1: the same patient coordinate
// system); an empty UID matches nothing.
func sameFrameOfReference(s *Series, v *Volume) bool {
	var want string
	for _, vol := range s.Volumes {
		if f := firstSlice(vol); f != nil {
			want = f.FrameOfReferenceUID
			break
		}
	}
	f := firstSlice(v)
	return want != "" && f != nil && f.FrameOfReferenceUID == want
}

func firstSlice(v *Volume) *Frame {
	for _, f := range v.Slices {
		if f != nil {
			return f
		}
	}
	return nil
}

// refit places the slices of a volume of another series on s's grid: a
// copy of v, or false when a slice has other geometry or lies on no grid
// position.
func refit(v *Volume, s *Series, tol Tolerances) (*Volume, bool) {
	out := *v
	out.Slices = make([]*Frame, len(s.Grid))
	for _, f := range v.Slices {
		if f == nil {
			continue
		}
		p := dot(f.Geometry.Position, s.Normal)
		i := nearest(s.Grid, p)
		if len(s.Grid) == 0 || math.Abs(s.Grid[i]-p) > tol.SlicePosition || out.Slices[i] != nil {
			return nil, false
		}
		// geometryDiff ignores the position along the normal, so it
		// compares slices of one stack.
		if geometryDiff(f.Geometry, s.Reference, tol) != "" {
			return nil, false
		}
		out.Slices[i] = f
	}
	return &out, true
}
