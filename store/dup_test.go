package store

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"
)

func TestDuplicates(t *testing.T) {
	clock := newTestClock(time.Date(2025, 3, 4, 9, 0, 0, 0, time.UTC))
	s, opts := newTestStore(t, func(o *Options) { o.Now = clock.Now })
	a := testInstance{SOP: uid(10, 1), InstanceNumber: 1, Payload: 4096}
	b := a
	b.Seed = 1 // same SOP instance, different pixel bytes
	b.AE = "OSTMIRE_PACS"
	dir := "instances/2.25.1001/2.25.1001.1/"

	steps := []struct {
		name     string
		put      testInstance
		want     InstanceRef
		versions int
		current  testInstance
	}{
		{"a first copy is stored as version 1", a,
			InstanceRef{a.SOP, 1, dir + a.SOP + ".dcm", DupNone}, 1, a},
		{"the same bytes again are identical and rewrite nothing", a,
			InstanceRef{a.SOP, 1, dir + a.SOP + ".dcm", DupIdentical}, 1, a},
		{"different bytes are kept beside the first as version 2, now current", b,
			InstanceRef{a.SOP, 2, dir + a.SOP + ".v2.dcm", DupReplaced}, 2, b},
		{"version 2 again is identical", b,
			InstanceRef{a.SOP, 2, dir + a.SOP + ".v2.dcm", DupIdentical}, 2, b},
		{"the first bytes again differ from the current version and become version 3", a,
			InstanceRef{a.SOP, 3, dir + a.SOP + ".v3.dcm", DupReplaced}, 3, a},
	}
	for _, st := range steps {
		t.Run(st.name, func(t *testing.T) {
			clock.Advance(time.Minute)
			before := storeFiles(t, s)
			ref := mustPut(t, s, st.put)
			if ref != st.want {
				t.Errorf("ref = %+v, want %+v", ref, st.want)
			}
			if st.want.Duplicate == DupIdentical {
				sameFiles(t, before, storeFiles(t, s))
			}
			in, err := s.Instance(a.SOP)
			if err != nil {
				t.Fatal(err)
			}
			if in.Versions != st.versions || in.Version != st.want.Version || in.SHA256 != st.current.sha() {
				t.Errorf("current = version %d of %d, sha %s; want %d of %d, %s",
					in.Version, in.Versions, in.SHA256, st.want.Version, st.versions, st.current.sha())
			}
			sr, err := s.Series(in.SeriesInstanceUID)
			if err != nil {
				t.Fatal(err)
			}
			if sr.Instances != 1 || sr.Bytes != in.Size {
				t.Errorf("series counts %d instances, %d bytes; want 1 and %d", sr.Instances, sr.Bytes, in.Size)
			}
		})
	}

	t.Run("every version is recorded with its time, size, hash and calling AE", func(t *testing.T) {
		vs, err := s.instanceVersions(a.SOP)
		if err != nil {
			t.Fatal(err)
		}
		wantAE := []string{"OSTMIRE_MR1", "OSTMIRE_PACS", "OSTMIRE_MR1"}
		wantSHA := []string{a.sha(), b.sha(), a.sha()}
		if len(vs) != 3 {
			t.Fatalf("%d versions, want 3", len(vs))
		}
		for i, v := range vs {
			if v.Version != i+1 || v.CallingAETitle != wantAE[i] || v.SHA256 != wantSHA[i] || v.Size == 0 {
				t.Errorf("version %d = %+v", i+1, v)
			}
			if i > 0 && !v.ReceivedAt.After(vs[i-1].ReceivedAt) {
				t.Errorf("version %d received %v, not after version %d", i+1, v.ReceivedAt, i)
			}
			if _, err := os.Stat(filepath.Join(opts.Dir, v.Path)); err != nil {
				t.Errorf("file of version %d: %v", i+1, err)
			}
		}
	})
}

func TestConcurrentIdenticalPutsStoreOneFile(t *testing.T) {
	s, _ := newTestStore(t)
	ti := testInstance{SOP: uid(11, 1), Payload: 64 << 10}
	var wg sync.WaitGroup
	refs := make([]InstanceRef, 8)
	for i := range refs {
		wg.Go(func() {
			ref, err := s.Put(context.Background(), ti.request(), bytes.NewReader(ti.dataSet()))
			if err != nil {
				t.Errorf("Put: %v", err)
			}
			refs[i] = ref
		})
	}
	wg.Wait()
	counts := map[DuplicateOutcome]int{}
	for _, r := range refs {
		counts[r.Duplicate]++
		if r.Version != 1 {
			t.Errorf("ref %+v: want version 1", r)
		}
	}
	if counts[DupNone] != 1 || counts[DupIdentical] != 7 {
		t.Errorf("outcomes %v, want 1 none and 7 identical", counts)
	}
	files := storeFiles(t, s)
	n := 0
	for _, f := range files {
		if filepath.Ext(f) == ".dcm" {
			n++
		}
	}
	if n != 1 {
		t.Errorf("instance files %v, want one", files)
	}
}

func TestDuplicateOutcomeString(t *testing.T) {
	for d, want := range map[DuplicateOutcome]string{
		DupNone: "none", DupIdentical: "identical", DupReplaced: "replaced", DupRestored: "restored",
		DuplicateOutcome(9): "DuplicateOutcome(9)",
	} {
		if got := d.String(); got != want {
			t.Errorf("%d.String() = %q, want %q", int(d), got, want)
		}
	}
}
