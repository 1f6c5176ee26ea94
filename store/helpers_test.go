package store

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"
)

// UIDs of the standard used by the tests.
const (
	mrImageStorage = "1.2.840.10008.5.1.4.1.1.4" // MR Image Storage, PS3.4 Annex B / PS3.6 Annex A (as in scp/syntax.go)
	explicitVRLE   = "1.2.840.10008.1.2.1"       // Explicit VR Little Endian, PS3.5 A.2 / PS3.6 Annex A
	implicitVRLE   = "1.2.840.10008.1.2"         // Implicit VR Little Endian, PS3.5 A.1 / PS3.6 Annex A
)

// testInstance is a synthetic MR image: a tiny data set of the elements
// Describe reads, plus pixel data of Payload bytes. Names are invented.
type testInstance struct {
	SOP, Study, Series string
	SeriesNumber       int
	InstanceNumber     int
	Payload            int  // bytes of pixel data
	Seed               byte // varies the pixel bytes, hence the hash
	TransferSyntax     string
	AE                 string
}

// defaults fills the fields a test left empty.
func (ti testInstance) defaults() testInstance {
	if ti.Study == "" {
		ti.Study = "2.25.1001"
	}
	if ti.Series == "" {
		ti.Series = ti.Study + ".1"
	}
	if ti.SeriesNumber == 0 {
		ti.SeriesNumber = 1
	}
	if ti.TransferSyntax == "" {
		ti.TransferSyntax = explicitVRLE
	}
	if ti.AE == "" {
		ti.AE = "OSTMIRE_MR1"
	}
	return ti
}

func (ti testInstance) request() PutRequest {
	ti = ti.defaults()
	return PutRequest{
		SOPClassUID:       mrImageStorage,
		SOPInstanceUID:    ti.SOP,
		TransferSyntaxUID: ti.TransferSyntax,
		CallingAETitle:    ti.AE,
		ScannerLabel:      "quellvander-mr1",
	}
}

// dataSet encodes the instance in its transfer syntax: Explicit VR Little
// Endian (PS3.5 7.1.2) or Implicit VR Little Endian (PS3.5 7.1.3), tags in
// ascending order (PS3.5 7.1).
func (ti testInstance) dataSet() []byte {
	ti = ti.defaults()
	pixels := make([]byte, ti.Payload+ti.Payload%2)
	for i := range pixels {
		pixels[i] = byte(i*7) ^ ti.Seed
	}
	elems := []struct {
		tag uint32
		vr  string
		val string
	}{
		{0x00080016, "UI", mrImageStorage},
		{0x00080018, "UI", ti.SOP},
		{0x00080020, "DA", "20250304"},
		{0x00080060, "CS", "MR"},
		{0x00080070, "LO", "Invented Medical"},
		{0x00080080, "LO", "Quellvander Ostmire"},
		{0x00081010, "SH", "HV-MR1"},
		{0x0008103E, "LO", "ep2d_diff_3scan_trace"},
		{0x00100010, "PN", "TEST^PHANTOM"},
		{0x00100020, "LO", "PHANTOM-001"},
		{0x0020000D, "UI", ti.Study},
		{0x0020000E, "UI", ti.Series},
		{0x00200011, "IS", strconv.Itoa(ti.SeriesNumber)},
		{0x00200013, "IS", strconv.Itoa(ti.InstanceNumber)},
		{0x7FE00010, "OB", string(pixels)},
	}
	var b []byte
	for _, e := range elems {
		v := []byte(e.val)
		if len(v)%2 == 1 {
			pad := byte(' ')
			if e.vr == "UI" {
				pad = 0
			}
			v = append(v, pad)
		}
		b = binary.LittleEndian.AppendUint16(b, uint16(e.tag>>16))
		b = binary.LittleEndian.AppendUint16(b, uint16(e.tag))
		switch {
		case ti.TransferSyntax == implicitVRLE:
			b = binary.LittleEndian.AppendUint32(b, uint32(len(v)))
		case e.vr == "OB":
			b = append(b, e.vr...)
			b = append(b, 0, 0)
			b = binary.LittleEndian.AppendUint32(b, uint32(len(v)))
		default:
			b = append(b, e.vr...)
			b = binary.LittleEndian.AppendUint16(b, uint16(len(v)))
		}
		b = append(b, v...)
	}
	return b
}

func (ti testInstance) sha() string {
	sum := sha256.Sum256(ti.dataSet())
	return hex.EncodeToString(sum[:])
}

// describeTestFile is the tests' Describe: it reads the file written by
// Put with a parser of its own (not the package's), so it checks the
// envelope too, and maps the data set elements to Attributes.
func describeTestFile(path string) (Attributes, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return Attributes{}, err
	}
	if len(b) < 144 || string(b[128:132]) != "DICM" { // PS3.10 7.1
		return Attributes{}, errors.New("no DICM prefix")
	}
	// (0002,0000) UL, explicit VR: tag 4, VR 2, length 2, value 4 (PS3.5 7.1.2).
	if binary.LittleEndian.Uint32(b[132:136]) != 0x00000002 || string(b[136:138]) != "UL" {
		return Attributes{}, errors.New("file meta does not start with its group length")
	}
	start := 144 + int(binary.LittleEndian.Uint32(b[140:144]))
	if start > len(b) {
		return Attributes{}, errors.New("group length past end of file")
	}
	ts := ""
	for p := 144; p < start; {
		elem := binary.LittleEndian.Uint16(b[p+2:])
		vr := string(b[p+4 : p+6])
		n, hdr := int(binary.LittleEndian.Uint16(b[p+6:])), 8
		if vr == "OB" {
			n, hdr = int(binary.LittleEndian.Uint32(b[p+8:])), 12
		}
		if elem == 0x0010 {
			ts = strings.TrimRight(string(b[p+hdr:p+hdr+n]), "\x00")
		}
		p += hdr + n
	}
	vals, err := parseTestDataSet(b[start:], ts == implicitVRLE)
	if err != nil {
		return Attributes{}, err
	}
	num := func(tag uint32) int { n, _ := strconv.Atoi(vals[tag]); return n }
	return Attributes{
		StudyInstanceUID:   vals[0x0020000D],
		SeriesInstanceUID:  vals[0x0020000E],
		StudyDate:          vals[0x00080020],
		PatientID:          vals[0x00100020],
		PatientName:        vals[0x00100010],
		Modality:           vals[0x00080060],
		SeriesDescription:  vals[0x0008103E],
		StationName:        vals[0x00081010],
		InstitutionName:    vals[0x00080080],
		Manufacturer:       vals[0x00080070],
		SeriesNumber:       num(0x00200011),
		InstanceNumber:     num(0x00200013),
		DeviceSerialNumber: "",
	}, nil
}

// parseTestDataSet reads the flat data sets testInstance makes.
func parseTestDataSet(b []byte, implicit bool) (map[uint32]string, error) {
	vals := map[uint32]string{}
	for p := 0; p < len(b); {
		if p+8 > len(b) {
			return nil, errors.New("data set truncated")
		}
		tag := uint32(binary.LittleEndian.Uint16(b[p:]))<<16 | uint32(binary.LittleEndian.Uint16(b[p+2:]))
		var n, hdr int
		switch {
		case implicit:
			n, hdr = int(binary.LittleEndian.Uint32(b[p+4:])), 8
		case string(b[p+4:p+6]) == "OB":
			n, hdr = int(binary.LittleEndian.Uint32(b[p+8:])), 12
		default:
			n, hdr = int(binary.LittleEndian.Uint16(b[p+6:])), 8
		}
		if p+hdr+n > len(b) {
			return nil, errors.New("data set truncated")
		}
		if tag != 0x7FE00010 {
			vals[tag] = strings.TrimRight(string(b[p+hdr:p+hdr+n]), "\x00 ")
		}
		p += hdr + n
	}
	return vals, nil
}

// testClock is an injected clock safe for concurrent use.
type testClock struct {
	mu sync.Mutex
	t  time.Time
}

func newTestClock(t time.Time) *testClock { return &testClock{t: t} }

func (c *testClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *testClock) Set(t time.Time) {
	c.mu.Lock()
	c.t = t
	c.mu.Unlock()
}

func (c *testClock) Advance(d time.Duration) {
	c.mu.Lock()
	c.t = c.t.Add(d)
	c.mu.Unlock()
}

// testOptions are the options newTestStore starts from.
func testOptions(dir string) Options {
	return Options{
		Dir:      dir,
		Location: time.UTC,
		Now:      newTestClock(time.Date(2025, 3, 4, 9, 30, 0, 0, time.UTC)).Now,
		Describe: describeTestFile,
	}
}

// newTestStore opens a Store in a fresh temporary folder; mods adjust the
// options first. The Store is closed when the test ends.
func newTestStore(t testing.TB, mods ...func(*Options)) (*Store, Options) {
	t.Helper()
	opts := testOptions(t.TempDir())
	for _, m := range mods {
		m(&opts)
	}
	return openTestStore(t, opts), opts
}

// reopen closes s and opens its folder again with opts.
func reopen(t testing.TB, s *Store, opts Options) *Store {
	t.Helper()
	if err := s.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	return openTestStore(t, opts)
}

// openTestStore opens a Store with opts and closes it when the test ends.
// It is storetest.Open for the store's own tests, which cannot import
// storetest (it imports store).
func openTestStore(t testing.TB, opts Options) *Store {
	t.Helper()
	s, err := Open(opts)
	if err != nil {
		t.Fatalf("Open %s: %v", opts.Dir, err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

// mustPut stores ti and fails the test on error.
func mustPut(t testing.TB, s *Store, ti testInstance) InstanceRef {
	t.Helper()
	ref, err := s.Put(t.Context(), ti.request(), bytes.NewReader(ti.dataSet()))
	if err != nil {
		t.Fatalf("Put %s: %v", ti.SOP, err)
	}
	return ref
}

// folderFiles lists every file and folder under dir (relative, sorted),
// except index.db, whose content but not presence changes.
func folderFiles(t testing.TB, dir string) []string {
	t.Helper()
	var out []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		if rel != "." && rel != indexFile {
			if d.IsDir() {
				rel += "/"
			}
			out = append(out, filepath.ToSlash(rel))
		}
		return nil
	})
	if err != nil {
		t.Fatalf("walking %s: %v", dir, err)
	}
	sort.Strings(out)
	return out
}

// storeFiles is folderFiles of an open Store's folder without the empty
// temp files it keeps ready for the next Puts (spareLoop). Call it with no
// Put in flight: every live temp name is then a spare. The folder is
// listed before the live names are read, and a name is live before its
// file exists, so a spare created meanwhile is never reported.
func storeFiles(t testing.TB, s *Store) []string {
	t.Helper()
	files := folderFiles(t, s.dir)
	s.mu.Lock()
	defer s.mu.Unlock()
	out := files[:0]
	for _, f := range files {
		if name, ok := strings.CutPrefix(f, tmpDir+"/"); ok {
			if _, spare := s.liveTemps[name]; spare {
				continue
			}
		}
		out = append(out, f)
	}
	return out
}

// tmpFiles lists Dir/tmp.
func tmpFiles(t testing.TB, dir string) []string {
	t.Helper()
	entries, err := os.ReadDir(filepath.Join(dir, tmpDir))
	if err != nil {
		t.Fatalf("listing tmp: %v", err)
	}
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	return names
}

// sameFiles fails the test if the folder's files changed.
func sameFiles(t testing.TB, before, after []string) {
	t.Helper()
	if strings.Join(before, "\n") != strings.Join(after, "\n") {
		t.Errorf("data folder changed:\nbefore %q\nafter  %q", before, after)
	}
}

// uid makes distinct test UIDs.
func uid(parts ...int) string {
	s := "2.25"
	for _, p := range parts {
		s += "." + strconv.Itoa(p)
	}
	return s
}

// waitFor waits until cond holds, failing the test after a generous
// deadline; it only guards against a hang, it measures nothing.
func waitFor(t testing.TB, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatal("condition not reached in 10 s")
		}
		time.Sleep(time.Millisecond)
	}
}
