package dwi

// TableRow is one volume of a series' gradient table: what `check
// --format json` and the study page show of each acquired weighting.
type TableRow struct {
	// BValue is the nominal b-value (Volume.BValue), BValueMeasured the
	// mean the images carry, s/mm².
	BValue, BValueMeasured float64
	Weighting              Weighting
	// Direction is the unit gradient direction in patient axes (PS3.3
	// C.8.13.5.9: Diffusion Gradient Orientation is in the patient
	// coordinate system); nil for a weighting without one.
	Direction *Direction
	// Images counts the acquired images, repeats included; Slices the
	// slice positions they cover.
	Images, Slices int
	// Combined says how slices with more than one image were made.
	Combined Combination
}

// GradientTable lists the series' own acquired volumes in the order of
// Series.Volumes: a b0 borrowed from another series belongs to that
// series' table, and scanner maps are no acquisition.
func (s *Series) GradientTable() []TableRow {
	var out []TableRow
	for _, v := range s.Volumes {
		if v.Kind != KindAcquired || v.SeriesUID != s.SeriesInstanceUID {
			continue
		}
		r := TableRow{BValue: v.BValue, BValueMeasured: v.BValueMeasured, Weighting: v.Weighting, Images: v.ImageCount(), Combined: v.Combined}
		if !v.Isotropic {
			d := v.Direction
			r.Direction = &d
		}
		for _, f := range v.Slices {
			if f != nil {
				r.Slices++
			}
		}
		out = append(out, r)
	}
	return out
}
