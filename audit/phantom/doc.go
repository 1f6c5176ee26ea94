// Package phantom writes synthetic diffusion-weighted MR studies with a
// known truth, for the tests of the audit, the demo and a hospital's
// self-test of its own installation.
//
// A study is a digital brain (or an ice-water phantom) imaged the way a
// clinical DWI protocol would: a b0, diffusion-weighted images along
// orthogonal gradient directions, the scanner's isotropic trace image per
// high b-value, and, in some cases, the scanner's ADC map. Each Case plants
// at most one defect (a missing b0, a wrong header b-value, an artifact on
// the b0 alone, a lesion, missing slices, ...) and Truth says what was
// planted and what every voxel holds: its tissue label, its true ADC and
// its noiseless signal. The same Options, Seed included, give the same
// bytes on every run (on another architecture, a last-bit difference in
// math.Exp could move a pixel across a rounding boundary).
//
// The parts:
//   - cases.go: the cases and what each plants;
//   - physics.go: the signal model, tissue values with their sources, and
//     the temperature dependence of free water;
//   - anatomy.go: the digital brain and the ice-water phantom, in patient
//     millimetres, so every matrix size images the same object;
//   - acquire.go: the acquisition: which images exist, their pixels with
//     Rician noise, the scanner's trace and ADC, and the planted defect;
//   - truth.go: Truth, what every voxel holds and what was planted;
//   - classic.go and enhanced.go: the DICOM data sets, one MR Image
//     Storage file per image, or Enhanced MR Image Storage multi-frame
//     files with functional groups (PS3.3 A.4 and A.36-2);
//   - layout.go, mosaic.go and makers.go: the makers' layouts (Layout):
//     the same images with the diffusion encoding the makers' scanners
//     write, in private blocks (a Siemens CSA header and mosaic, GE,
//     Philips, UIH) or in Canon's partial use of the standard attributes,
//     each written from a public description of it;
//   - dataset.go: a small builder of suyashkumar/dicom elements;
//   - phantom.go: Write, which ties them together.
//
// Every name in the files is invented: the hospital, its scanners, the
// patient, the manufacturer. Nothing here names a real person; the only
// makers' names written are the private creator strings of the makers'
// layouts, which a reader needs to find those blocks (PS3.5 7.8.1).
//
// The files are written with github.com/suyashkumar/dicom, a DICOM
// implementation independent of the audit's reader, through the shared
// low-level writer of package audit/synth.
package phantom
