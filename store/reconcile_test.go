package store

import (
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// handMadePart10 is a Part 10 file as another program might write it:
// preamble, "DICM", a File Meta Information of only the Type 1 elements
// and no group length, then the data set (PS3.10 7.1 Table 7.1-1; the
// group length is Type 1 there, but readers in the field do without it).
func handMadePart10(ti testInstance) []byte {
	ti = ti.defaults()
	b := make([]byte, 128)
	b = append(b, "DICM"...)
	add := func(elem uint16, vr string, v []byte) {
		if len(v)%2 == 1 {
			v = append(v, 0)
		}
		b = binary.LittleEndian.AppendUint16(b, 0x0002)
		b = binary.LittleEndian.AppendUint16(b, elem)
		b = append(b, vr...)
		if vr == "OB" {
			b = append(b, 0, 0)
			b = binary.LittleEndian.AppendUint32(b, uint32(len(v)))
		} else {
			b = binary.LittleEndian.AppendUint16(b, uint16(len(v)))
		}
		b = append(b, v...)
	}
	add(0x0001, "OB", []byte{0, 1})
	add(0x0002, "UI", []byte(mrImageStorage))
	add(0x0003, "UI", []byte(ti.SOP))
	add(0x0010, "UI", []byte(ti.TransferSyntax))
	add(0x0012, "UI", []byte("2.25.42"))
	return append(b, ti.dataSet()...)
}

// describeAny is a Describe that also reads files without a group length,
// for files dropped in by hand.
func describeAny(path string) (Attributes, error) {
	f, err := os.Open(path)
	if err != nil {
		return Attributes{}, err
	}
	defer f.Close()
	meta, off, err := readFileMeta(f)
	if err != nil {
		return Attributes{}, err
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return Attributes{}, err
	}
	vals, err := parseTestDataSet(b[off:], meta.TransferSyntaxUID == implicitVRLE)
	if err != nil {
		return Attributes{}, err
	}
	return Attributes{StudyInstanceUID: vals[0x0020000D], SeriesInstanceUID: vals[0x0020000E], Modality: vals[0x00080060]}, nil
}

func TestOpenRemovesLeftoverTempFiles(t *testing.T) {
	s, opts := newTestStore(t)
	s.Close()
	for _, name := range []string{"put-1-1.tmp", "put-99-7.tmp", "stray"} {
		if err := os.WriteFile(filepath.Join(opts.Dir, tmpDir, name), []byte("half a data set"), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	s2, err := Open(opts)
	if err != nil {
		t.Fatal(err)
	}
	defer s2.Close()
	if rep := s2.LastReconcile(); rep.TempRemoved != 3 {
		t.Errorf("TempRemoved = %d, want 3", rep.TempRemoved)
	}
	if names := tmpFiles(t, opts.Dir); len(names) != 0 {
		t.Errorf("tmp after Open: %v", names)
	}
}

func TestReconcile(t *testing.T) {
	t.Run("a deleted file is reported missing and marked, and cleared when it comes back", func(t *testing.T) {
		s, opts := newTestStore(t)
		ti := testInstance{SOP: uid(20, 1), Payload: 1000}
		ref := mustPut(t, s, ti)
		keep := mustPut(t, s, testInstance{SOP: uid(20, 2), Payload: 1000})
		abs := filepath.Join(opts.Dir, ref.Path)
		data, _ := os.ReadFile(abs)
		if err := os.Remove(abs); err != nil {
			t.Fatal(err)
		}

		s = reopen(t, s, opts)
		rep := s.LastReconcile()
		if !slices.Equal(rep.MissingFiles, []string{ref.Path}) || len(rep.Reindexed) != 0 {
			t.Errorf("report = %+v, want only %s missing", rep, ref.Path)
		}
		in, err := s.Instance(ti.SOP)
		if err != nil || !in.Missing || in.Pruned {
			t.Errorf("Instance = %+v, %v; want Missing", in, err)
		}
		if _, err := s.OpenInstance(ti.SOP); !errors.Is(err, errMissingFile) {
			t.Errorf("OpenInstance = %v, want ErrMissingFile", err)
		}
		if in, _ := s.Instance(keep.SOPInstanceUID); in.Missing {
			t.Errorf("an instance with its file was marked missing")
		}

		if err := os.WriteFile(abs, data, 0o600); err != nil {
			t.Fatal(err)
		}
		rep, err = s.Reconcile(t.Context())
		if err != nil {
			t.Fatal(err)
		}
		if len(rep.MissingFiles) != 0 {
			t.Errorf("second report = %+v", rep)
		}
		if in, _ := s.Instance(ti.SOP); in.Missing {
			t.Error("the file is back but the record is still marked missing")
		}
	})

	t.Run("a file dropped in by hand is indexed with Describe", func(t *testing.T) {
		s, opts := newTestStore(t, func(o *Options) { o.Describe = describeAny })
		ti := testInstance{SOP: uid(21, 1), Study: uid(21), Series: uid(21, 5), Payload: 2000}
		rel := "instances/" + ti.Study + "/" + ti.Series + "/" + ti.SOP + ".dcm"
		abs := filepath.Join(opts.Dir, filepath.FromSlash(rel))
		if err := os.MkdirAll(filepath.Dir(abs), 0o700); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(abs, handMadePart10(ti), 0o600); err != nil {
			t.Fatal(err)
		}
		junk := filepath.Join(filepath.Dir(abs), "notes.txt")
		if err := os.WriteFile(junk, []byte("not DICOM"), 0o600); err != nil {
			t.Fatal(err)
		}

		s = reopen(t, s, opts)
		rep := s.LastReconcile()
		if !slices.Equal(rep.Reindexed, []string{rel}) {
			t.Errorf("Reindexed = %v, want [%s]", rep.Reindexed, rel)
		}
		if !slices.Equal(rep.Unreadable, []string{"instances/" + ti.Study + "/" + ti.Series + "/notes.txt"}) {
			t.Errorf("Unreadable = %v", rep.Unreadable)
		}
		if _, err := os.Stat(junk); err != nil {
			t.Errorf("an unreadable file was not left in place: %v", err)
		}
		in, err := s.Instance(ti.SOP)
		if err != nil {
			t.Fatal(err)
		}
		if !in.Reindexed || in.Version != 1 || in.Path != rel || in.SHA256 != ti.sha() || in.SeriesInstanceUID != ti.Series {
			t.Errorf("Instance = %+v", in)
		}
		if st, err := s.Study(ti.Study); err != nil || len(st.Series) != 1 || st.Series[0].Instances != 1 {
			t.Errorf("Study = %+v, %v", st, err)
		}
		// Indexed once: a second pass finds nothing new.
		if rep, err := s.Reconcile(t.Context()); err != nil || len(rep.Reindexed) != 0 {
			t.Errorf("second Reconcile = %+v, %v", rep, err)
		}
	})

	t.Run("a version renamed into place just before a crash becomes current", func(t *testing.T) {
		s, opts := newTestStore(t)
		v1 := testInstance{SOP: uid(22, 1), Payload: 500}
		ref := mustPut(t, s, v1)
		s.Close()
		v2 := v1
		v2.Seed = 9
		rel := strings.TrimSuffix(ref.Path, ".dcm") + ".v2.dcm"
		data := append(mustFileMeta(t, v2.SOP, explicitVRLE, "OSTMIRE_MR1"), v2.dataSet()...)
		if err := os.WriteFile(filepath.Join(opts.Dir, rel), data, 0o600); err != nil {
			t.Fatal(err)
		}
		s2, err := Open(opts)
		if err != nil {
			t.Fatal(err)
		}
		defer s2.Close()
		in, err := s2.Instance(v1.SOP)
		if err != nil {
			t.Fatal(err)
		}
		if in.Version != 2 || in.Versions != 2 || in.SHA256 != v2.sha() || in.CallingAETitle != "OSTMIRE_MR1" {
			t.Errorf("Instance = %+v", in)
		}
	})

	t.Run("a lost index is rebuilt from the files", func(t *testing.T) {
		s, opts := newTestStore(t)
		var want []string
		for i := range 5 {
			want = append(want, mustPut(t, s, testInstance{SOP: uid(23, i), InstanceNumber: i, Payload: 300}).Path)
		}
		s.Close()
		if err := os.Remove(filepath.Join(opts.Dir, indexFile)); err != nil {
			t.Fatal(err)
		}
		s2, err := Open(opts)
		if err != nil {
			t.Fatal(err)
		}
		defer s2.Close()
		if got := s2.LastReconcile().Reindexed; !slices.Equal(got, want) {
			t.Errorf("Reindexed = %v, want %v", got, want)
		}
		list, err := s2.Instances("2.25.1001.1")
		if err != nil || len(list) != 5 {
			t.Errorf("Instances = %d, %v; want 5", len(list), err)
		}
	})
}

func TestParseInstanceFileName(t *testing.T) {
	cases := []struct {
		name    string
		sop     string
		version int
		ok      bool
	}{
		{"1.2.3.dcm", "1.2.3", 1, true},
		{"1.2.3.v2.dcm", "1.2.3", 2, true},
		{"1.2.3.v17.dcm", "1.2.3", 17, true},
		{"1.2.3.v1.dcm", "", 0, false},
		{"1.2.3.v02.dcm", "", 0, false},
		{"1.2.3.v.dcm", "", 0, false},
		{"1.2.3.v-2.dcm", "", 0, false},
		{"1.2.3", "", 0, false},
		{"IM0001.dcm", "", 0, false},
		{"..dcm", "", 0, false},
	}
	for _, c := range cases {
		t.Run("file name "+c.name+" is parsed correctly", func(t *testing.T) {
			sop, v, ok := parseInstanceFileName(c.name)
			if sop != c.sop || v != c.version || ok != c.ok {
				t.Errorf("= %q, %d, %v; want %q, %d, %v", sop, v, ok, c.sop, c.version, c.ok)
			}
		})
	}
}
