// Package preview draws the picture a technologist checks a finding
// against: one slice of a computed diffusion series as four panels side
// by side, b0, DWI (the trace image at the highest b-value), eADC and
// ADC, with the region of every finding on that slice outlined on each
// panel.
//
// Input is what the audit computed (analysis.Result: the trace volumes,
// ADC, eADC and tissue mask, on the series' slice grid) and the findings
// of the series (rules.Finding with a Region). Output is an RGBA image
// (Picture) encoded as PNG. Everything is drawn with the standard image
// packages and golang.org/x/image (the Go Regular font, embedded): no
// external program, no cgo, no GPU.
//
// How values become colours:
//
//   - b0 and DWI: grey, black at zero signal (or at the 1st
//     percentile of the tissue, if that is below zero) and white at
//     twice the median of the parenchyma (the tissue mask without CSF),
//     over the whole series: the brain sits at mid grey, bright CSF and
//     scalp fat do not push it into the dark end, every slice is drawn
//     on one scale, and an artifact on a few slices does not move it;
//     values beyond the window are clipped.
//   - eADC: grey, 0 black to 1 white (Sb/S0 has no unit).
//   - ADC: the viridis colour scale (viridis.go) from 0 to adcMax,
//     3.5e-3 mm²/s, clipped at both ends; the colour bar under the panel
//     is labelled in 1e-3 mm²/s.
//   - eADC and ADC outside the tissue mask are black (noTissueColor):
//     a ratio of background noise means nothing. Inside the mask a voxel
//     whose value is undefined (NaN: a signal at or below zero, a slice
//     the volume lacks) is dark grey (undefinedColor) on every panel.
//   - Finding regions: OutlineColor, pure magenta #FF00FF, a colour no
//     grey and no viridis entry has, drawn outlineWidth pixels wide just
//     outside the region's box, so the voxels in it stay visible.
//
// Small matrices are enlarged by an integer factor (nearest neighbour,
// no smoothing: one voxel stays one square) until a panel's longer side
// is at least minPanelPixels. Voxels are drawn square: with unequal row and
// column spacing the picture is stretched along one axis, and the scale
// bar, drawn along a row, measures with the column spacing. The picture
// carries the series number, the slice index and position, a
// millimetre scale bar (from Pixel Spacing) and a line saying that the
// audit checks acquisitions and does not diagnose.
// It never carries patient identifiers: the series description, patient
// name and UIDs are not drawn.
package preview
