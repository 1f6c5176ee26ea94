package store

import (
	"bytes"
	"context"
	"errors"
	"slices"
	"testing"
	"time"
)

func TestStudiesByReceiveDay(t *testing.T) {
	// Two zones where the UTC day and the local day differ at the times
	// used: 10 hours east and 7 hours west of UTC.
	cases := []struct {
		name     string
		loc      *time.Location
		at       time.Time // receive time of study A
		localDay string
		utcDay   string
	}{
		{"east of UTC, received late in the UTC evening", time.FixedZone("UTC+10", 10*3600),
			time.Date(2025, 3, 4, 20, 0, 0, 0, time.UTC), "2025-03-05", "2025-03-04"},
		{"west of UTC, received early in the UTC morning", time.FixedZone("UTC-7", -7*3600),
			time.Date(2025, 3, 5, 3, 0, 0, 0, time.UTC), "2025-03-04", "2025-03-05"},
	}
	for _, c := range cases {
		t.Run("a study counts on its local receive day "+c.name, func(t *testing.T) {
			clock := newTestClock(c.at)
			s, _ := newTestStore(t, func(o *Options) { o.Now = clock.Now; o.Location = c.loc })
			a := testInstance{SOP: uid(50, 1), Study: uid(50), Series: uid(50, 1), Payload: 100}
			mustPut(t, s, a)
			clock.Set(c.at.Add(48 * time.Hour))
			b := testInstance{SOP: uid(51, 1), Study: uid(51), Series: uid(51, 1), Payload: 100}
			mustPut(t, s, b)

			got := studyUIDs(t, s, c.localDay)
			if !slices.Equal(got, []string{a.Study}) {
				t.Errorf("Studies(%s) = %v, want [%s]", c.localDay, got, a.Study)
			}
			if got := studyUIDs(t, s, c.utcDay); len(got) != 0 {
				t.Errorf("Studies(%s, the UTC day) = %v, want none", c.utcDay, got)
			}
			if got := studyUIDs(t, s, ""); !slices.Equal(got, []string{a.Study, b.Study}) {
				t.Errorf("Studies(\"\") = %v, want both, oldest first", got)
			}
			in, err := s.Instance(a.SOP)
			if err != nil || in.ReceiveDay != c.localDay || in.ReceivedAt.Location() != c.loc {
				t.Errorf("Instance = %s in %v, %v; want day %s", in.ReceiveDay, in.ReceivedAt.Location(), err, c.localDay)
			}
		})
	}
	t.Run("a malformed day is an error", func(t *testing.T) {
		s, _ := newTestStore(t)
		if _, err := s.Studies("4 March"); err == nil {
			t.Error("Studies accepted a malformed day")
		}
	})
}

func studyUIDs(t *testing.T, s *Store, day string) []string {
	t.Helper()
	studies, err := s.Studies(day)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, st := range studies {
		out = append(out, st.StudyInstanceUID)
	}
	return out
}

func TestQueries(t *testing.T) {
	clock := newTestClock(time.Date(2025, 3, 4, 9, 0, 0, 0, time.UTC))
	s, _ := newTestStore(t, func(o *Options) { o.Now = clock.Now })
	study := uid(60)
	for series := 1; series <= 2; series++ {
		for i := 3; i >= 1; i-- { // received out of order
			clock.Advance(time.Second)
			mustPut(t, s, testInstance{SOP: uid(60, series, i), Study: study, Series: uid(60, series),
				SeriesNumber: 10 - series, InstanceNumber: i, Payload: 100 * i})
		}
	}

	t.Run("a study lists its series by series number with their totals", func(t *testing.T) {
		st, err := s.Study(study)
		if err != nil {
			t.Fatal(err)
		}
		if len(st.Series) != 2 || st.Series[0].SeriesNumber != 8 || st.Series[1].SeriesNumber != 9 {
			t.Fatalf("series = %+v", st.Series)
		}
		sr := st.Series[0]
		if sr.Instances != 3 || sr.Modality != "MR" || sr.ScannerLabel != "quellvander-mr1" ||
			sr.CallingAETitle != "OSTMIRE_MR1" || sr.StationName != "HV-MR1" || sr.SeriesDescription != "ep2d_diff_3scan_trace" {
			t.Errorf("series = %+v", sr)
		}
		if st.PatientName != "TEST^PHANTOM" || st.StudyDate != "20250304" || !st.FirstReceived.Before(st.LastReceived) {
			t.Errorf("study = %+v", st)
		}
	})
	t.Run("instances come sorted by instance number", func(t *testing.T) {
		list, err := s.Instances(uid(60, 1))
		if err != nil {
			t.Fatal(err)
		}
		var nums []int
		for _, in := range list {
			nums = append(nums, in.InstanceNumber)
		}
		if !slices.Equal(nums, []int{1, 2, 3}) {
			t.Errorf("instance numbers %v", nums)
		}
	})
	t.Run("unknown UIDs give ErrNotFound", func(t *testing.T) {
		if _, err := s.Study("2.25.404"); !errors.Is(err, ErrNotFound) {
			t.Errorf("Study = %v", err)
		}
		if _, err := s.Series("2.25.404"); !errors.Is(err, ErrNotFound) {
			t.Errorf("Series = %v", err)
		}
		if _, err := s.Instances("2.25.404"); !errors.Is(err, ErrNotFound) {
			t.Errorf("Instances = %v", err)
		}
		if _, err := s.Instance("2.25.404"); !errors.Is(err, ErrNotFound) {
			t.Errorf("Instance = %v", err)
		}
		if _, err := s.OpenInstance("2.25.404"); !errors.Is(err, ErrNotFound) {
			t.Errorf("OpenInstance = %v", err)
		}
	})
	t.Run("a new version in another series moves the instance", func(t *testing.T) {
		moved := testInstance{SOP: uid(60, 1, 1), Study: study, Series: uid(60, 2), SeriesNumber: 8, InstanceNumber: 4, Payload: 50}
		if ref := mustPut(t, s, moved); ref.Duplicate != DupReplaced {
			t.Errorf("ref = %+v", ref)
		}
		a, _ := s.Series(uid(60, 1))
		b, _ := s.Series(uid(60, 2))
		if a.Instances != 2 || b.Instances != 4 {
			t.Errorf("instances %d and %d, want 2 and 4", a.Instances, b.Instances)
		}
	})
}

func TestClosedStore(t *testing.T) {
	s, _ := newTestStore(t)
	ti := testInstance{SOP: uid(70, 1), Payload: 100}
	mustPut(t, s, ti)

	t.Run("a Put still receiving when Close is called fails with ErrClosed", func(t *testing.T) {
		s, opts := newTestStore(t)
		started := make(chan struct{})
		done := make(chan error, 1)
		go func() {
			_, err := s.Put(t.Context(), ti.request(), &endless{started: started})
			done <- err
		}()
		<-started
		if err := s.Close(); err != nil {
			t.Fatal(err)
		}
		if err := <-done; !errors.Is(err, ErrClosed) {
			t.Errorf("Put = %v, want ErrClosed", err)
		}
		if names := tmpFiles(t, opts.Dir); len(names) != 0 {
			t.Errorf("tmp after Close: %v", names)
		}
	})

	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Errorf("second Close = %v", err)
	}
	checks := map[string]error{}
	_, checks["Put"] = s.Put(t.Context(), ti.request(), nil)
	_, checks["Instance"] = s.Instance(ti.SOP)
	_, checks["Studies"] = s.Studies("")
	_, checks["Prune"] = s.Prune(t.Context())
	_, checks["Reconcile"] = s.Reconcile(t.Context())
	checks["Ping"] = s.Ping()
	for name, err := range checks {
		if !errors.Is(err, ErrClosed) {
			t.Errorf("%s after Close = %v, want ErrClosed", name, err)
		}
	}
}

// endless is a data set that never ends, one byte per Read.
type endless struct {
	started chan struct{}
	n       int
}

func (e *endless) Read(p []byte) (int, error) {
	if e.n == 0 {
		close(e.started)
	}
	e.n++
	p[0] = 0
	return 1, nil
}

func TestCloseCommitsPutsAlreadyReceived(t *testing.T) {
	release := make(chan struct{})
	described := make(chan struct{})
	s, opts := newTestStore(t, func(o *Options) {
		o.Describe = func(p string) (Attributes, error) {
			close(described)
			<-release // the data set is complete; Close comes meanwhile
			return describeTestFile(p)
		}
	})
	ti := testInstance{SOP: uid(71, 1), Payload: 1000}
	done := make(chan error, 1)
	go func() {
		_, err := s.Put(context.Background(), ti.request(), bytes.NewReader(ti.dataSet()))
		done <- err
	}()
	<-described
	closed := make(chan error, 1)
	go func() { closed <- s.Close() }()
	waitFor(t, func() bool { s.mu.Lock(); defer s.mu.Unlock(); return s.closed })
	close(release)
	if err := <-done; err != nil {
		t.Errorf("Put received before Close = %v, want success", err)
	}
	if err := <-closed; err != nil {
		t.Fatal(err)
	}
	opts.Describe = describeTestFile
	s2, err := Open(opts)
	if err != nil {
		t.Fatal(err)
	}
	defer s2.Close()
	if _, err := s2.Instance(ti.SOP); err != nil {
		t.Errorf("Instance after reopen = %v", err)
	}
}
