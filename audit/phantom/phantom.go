package phantom

import (
	"errors"
	"fmt"
	"hash/fnv"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/synth"
	"dwiaudit/scp/part10"
)

// Study is what Write wrote.
type Study struct {
	Dir      string   // the output folder
	Files    []string // every file, in writing order
	StudyUID string
	Series   []SeriesInfo
	Truth    *Truth
}

// SeriesInfo is one written series.
type SeriesInfo struct {
	UID         string
	Number      int
	Description string
	Role        Role
	SOPClassUID string
	Files       []string // classic: one per image; multi-frame: one per instance
	Images      int      // images (classic) or frames (multi-frame) in the series
}

// Series numbers, fixed per role so a test can find a series by number.
const (
	seriesNumberB0  = 1
	seriesNumberDWI = 2
	seriesNumberADC = 3
)

// Independent random streams from one seed: UIDs, and (per image, see
// noiseKey) noise.
const uidStream = 0x55494453 // "UIDS"

// Write writes the study opt describes into dir (created if missing; it
// must be empty), one subfolder per series, and returns what it wrote.
// The bytes depend only on opt: the same Options give the same files, UIDs
// included. UIDs also depend on the case and on MultiFrame, so that the
// studies of every case, classic and multi-frame, can share one archive;
// the pixels depend only on the seed and the images' own parameters, so
// that classic and multi-frame versions of a case hold the same values.
func Write(dir string, opt Options) (*Study, error) {
	o, err := opt.withDefaults()
	if err != nil {
		return nil, err
	}
	if err := emptyDir(dir); err != nil {
		return nil, err
	}
	a := plan(o)
	a.acquire()

	w := newWriter(dir, a)
	if err := w.write(); err != nil {
		return nil, err
	}
	return w.study, nil
}

// emptyDir creates dir, or checks that it holds nothing.
func emptyDir(dir string) error {
	entries, err := os.ReadDir(dir)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return os.MkdirAll(dir, 0o755)
	case err != nil:
		return err
	case len(entries) > 0:
		return fmt.Errorf("%w: %s", ErrOutputNotEmpty, dir)
	}
	return nil
}

// seriesOut is one series being written.
type seriesOut struct {
	role        Role
	number      int
	uid         string
	description string
	folder      string
	vols        []*volume
	start       time.Time // series acquisition start
}

// writer turns an acquisition into files.
type writer struct {
	dir    string
	a      *acquisition
	o      Options
	uids   *rand.Rand
	study  *Study
	frame  string // Frame of Reference UID, shared by every series (same patient position)
	dimOrg string // Dimension Organization UID, shared by the study's multi-frame instances
	series []*seriesOut
	// pixelBytes is reused for every file: each is written before the
	// next fill.
	pixelBytes []byte
}

func newWriter(dir string, a *acquisition) *writer {
	h := fnv.New64a()
	fmt.Fprintf(h, "%s|%t", a.opt.Case, a.opt.MultiFrame)
	if a.opt.Layout.maker() {
		// Standard and enhanced keep the UIDs they always had; every
		// maker's layout gets its own, so all can share one archive.
		fmt.Fprintf(h, "|%s", a.opt.Layout)
	}
	w := &writer{
		dir:  dir,
		a:    a,
		o:    a.opt,
		uids: rand.New(rand.NewPCG(uint64(a.opt.Seed)^h.Sum64(), uidStream)),
	}
	w.study = &Study{Dir: dir, StudyUID: synth.NewUID(w.uids), Truth: a.truth}
	w.frame = synth.NewUID(w.uids)
	w.dimOrg = synth.NewUID(w.uids)
	// One UID per role, drawn whether or not the role is used, so a
	// series' UID does not depend on which other series exist.
	roleUID := map[Role]string{}
	for _, r := range []Role{RoleB0, RoleDWI, RoleADC} {
		roleUID[r] = synth.NewUID(w.uids)
	}
	for _, r := range []Role{RoleB0, RoleDWI, RoleADC} {
		var vols []*volume
		for _, v := range a.vols {
			if v.role == r {
				vols = append(vols, v)
			}
		}
		if len(vols) == 0 {
			continue
		}
		so := &seriesOut{role: r, uid: roleUID[r], vols: vols}
		switch r {
		case RoleB0:
			so.number, so.description, so.start = seriesNumberB0, "DWI b0", w.o.StudyDate
		case RoleDWI:
			so.number, so.description, so.start = seriesNumberDWI, dwiDescription(vols), w.o.StudyDate.Add(time.Minute)
		case RoleADC:
			so.number, so.description, so.start = seriesNumberADC, "DWI ADC", w.o.StudyDate.Add(4*time.Minute)
		}
		so.folder = fmt.Sprintf("series%02d-%s", so.number, r)
		w.series = append(w.series, so)
	}
	w.pixelBytes = make([]byte, 0, 2*a.rows*a.cols)
	return w
}

// dwiDescription is the DWI series' Series Description: its b-values and
// direction count, as written in the header.
func dwiDescription(vols []*volume) string {
	var parts []string
	seen := map[float64]bool{}
	dirs := 0
	for _, v := range vols {
		if !seen[v.bHeader] && v.kind != volTrace {
			seen[v.bHeader] = true
			parts = append(parts, fmt.Sprintf("b%g", v.bHeader))
		}
		if v.kind == volDirectional && v.dirIndex+1 > dirs {
			dirs = v.dirIndex + 1
		}
	}
	s := "DWI " + strings.Join(parts, " ")
	if dirs > 0 {
		s += fmt.Sprintf(" %ddir", dirs)
	}
	return s
}

func (w *writer) write() error {
	for _, so := range w.series {
		if err := os.MkdirAll(filepath.Join(w.dir, so.folder), 0o755); err != nil {
			return err
		}
		var info *SeriesInfo
		var err error
		switch {
		case w.o.MultiFrame:
			info, err = w.writeEnhancedSeries(so)
		case w.o.Layout == LayoutSiemensMosaic:
			info, err = w.writeMosaicSeries(so)
		default:
			info, err = w.writeClassicSeries(so)
		}
		if err != nil {
			return err
		}
		w.study.Series = append(w.study.Series, *info)
		w.study.Files = append(w.study.Files, info.Files...)
	}
	return nil
}

// fileMeta adds the File Meta Information (PS3.10 7.1 Table 7.1-1).
func (w *writer) fileMeta(it *item, sopClass, sopInstance string) {
	it.add(tag.FileMetaInformationVersion, []byte{0x00, 0x01})
	it.str(tag.MediaStorageSOPClassUID, sopClass)
	it.str(tag.MediaStorageSOPInstanceUID, sopInstance)
	it.str(tag.TransferSyntaxUID, w.o.TransferSyntax)
	it.str(tag.ImplementationClassUID, part10.ImplementationClassUID)
	it.str(tag.ImplementationVersionName, part10.ImplementationVersionName)
}

// common adds the modules classic and enhanced images share: SOP Common
// (PS3.3 C.12.1), Patient (C.7.1.1), General Study (C.7.2.1), General
// Series (C.7.3.1), Frame of Reference (C.7.4.1) and the equipment
// attributes of General Equipment (C.7.5.1), which also satisfy the Type 1
// ones of Enhanced General Equipment (C.7.5.2).
func (w *writer) common(it *item, so *seriesOut, sopClass, sopInstance string) {
	o := w.o
	it.str(tag.SOPClassUID, sopClass)
	it.str(tag.SOPInstanceUID, sopInstance)

	it.str(tag.PatientName, o.PatientName)
	it.str(tag.PatientID, o.PatientID)
	it.str(tag.PatientBirthDate, "19700101")
	it.str(tag.PatientSex, "O")

	it.str(tag.StudyInstanceUID, w.study.StudyUID)
	it.str(tag.StudyDate, da(o.StudyDate))
	it.str(tag.StudyTime, tm(o.StudyDate))
	it.str(tag.ReferringPhysicianName, "")
	it.str(tag.StudyID, "1")
	it.str(tag.AccessionNumber, fmt.Sprintf("QOHSYN%06d", uint64(o.Seed)%1000000))
	study := "MR brain synthetic"
	body := "BRAIN"
	if o.Case.iceWater() {
		study, body = "QA ice-water phantom synthetic", "HEAD"
	}
	it.str(tag.StudyDescription, study)

	it.str(tag.Modality, "MR")
	it.str(tag.SeriesInstanceUID, so.uid)
	it.is(tag.SeriesNumber, so.number)
	it.str(tag.SeriesDate, da(so.start))
	it.str(tag.SeriesTime, tm(so.start))
	it.str(tag.SeriesDescription, so.description)
	it.str(tag.ProtocolName, o.Protocol)
	it.str(tag.BodyPartExamined, body)
	it.str(tag.PatientPosition, "HFS")

	it.str(tag.FrameOfReferenceUID, w.frame)
	it.str(tag.PositionReferenceIndicator, "")

	s := o.Scanner
	it.str(tag.Manufacturer, s.Manufacturer)
	it.str(tag.InstitutionName, s.Institution)
	it.str(tag.StationName, s.Station)
	it.str(tag.ManufacturerModelName, s.Model)
	it.str(tag.DeviceSerialNumber, s.DeviceSerial)
	it.str(tag.SoftwareVersions, s.SoftwareVersions)
}

// imagePixel adds the Image Pixel module (PS3.3 C.7.6.3) but Pixel Data,
// for images of rows x cols pixels.
func (w *writer) imagePixel(it *item, rows, cols int) {
	it.num(tag.SamplesPerPixel, 1)
	it.str(tag.PhotometricInterpretation, "MONOCHROME2")
	it.num(tag.Rows, rows)
	it.num(tag.Columns, cols)
	it.num(tag.BitsAllocated, 16)
	it.num(tag.BitsStored, bitsStored)
	it.num(tag.HighBit, bitsStored-1)
	it.num(tag.PixelRepresentation, 0)
}

// position is Image Position (Patient) of slice s of v: the centre of the
// first pixel (PS3.3 C.7.6.2.1.1).
func (w *writer) position(v *volume, s int) []float64 {
	a := w.a
	x := -float64(a.cols-1) / 2 * a.spacing
	y := -float64(a.rows-1) / 2 * a.spacing
	return []float64{x, y, a.sliceZ[s] + v.zShift}
}

// orientation is Image Orientation (Patient): rows along +x (patient
// left), columns along +y (posterior), an axial slice.
func orientation() []float64 { return []float64{1, 0, 0, 0, 1, 0} }

// sliceBytes is slice s of v as little-endian bytes (PS3.5 8.2: both our
// transfer syntaxes are little endian), in w.pixelBytes.
func (w *writer) sliceBytes(v *volume, s int) []byte {
	n := w.a.rows * w.a.cols
	buf := w.pixelBytes[:0]
	for _, p := range v.pixels[s*n : (s+1)*n] {
		buf = append(buf, byte(p), byte(p>>8))
	}
	w.pixelBytes = buf
	return buf
}

// imageTime is when image (volume k of the series) was acquired: volumes
// one repetition time apart.
func (so *seriesOut) imageTime(k int) time.Time {
	return so.start.Add(time.Duration(k) * repetitionTime)
}

func da(t time.Time) string { return t.Format("20060102") }
func tm(t time.Time) string { return t.Format("150405") }
func dt(t time.Time) string { return t.Format("20060102150405.000000") }
