package web

import (
	"context"
	"errors"
	"slices"
	"sync"
	"sync/atomic"
	"testing"

	"dwiaudit/audit"
)

func TestStudyCacheComputesEachStudyOnce(t *testing.T) {
	var computed sync.Map // study -> *atomic.Int32
	count := func(study string) int {
		n, _ := computed.LoadOrStore(study, new(atomic.Int32))
		return int(n.(*atomic.Int32).Load())
	}
	release := make(chan struct{})
	compute := func(study string, gate chan struct{}) func(context.Context) (*audit.Report, error) {
		return func(context.Context) (*audit.Report, error) {
			n, _ := computed.LoadOrStore(study, new(atomic.Int32))
			n.(*atomic.Int32).Add(1)
			if gate != nil {
				<-gate
			}
			return &audit.Report{Files: len(study)}, nil
		}
	}

	t.Run("eight concurrent requests for one study compute it once and share the result", func(t *testing.T) {
		c := newStudyCache(2)
		var wg sync.WaitGroup
		reps := make([]*audit.Report, 8)
		for i := range reps {
			wg.Go(func() {
				rep, err := c.get(t.Context(), "A", "v1", compute("A", release))
				if err != nil {
					t.Error(err)
				}
				reps[i] = rep
			})
		}
		close(release)
		wg.Wait()
		if n := count("A"); n != 1 {
			t.Errorf("study computed %d times, want once", n)
		}
		for i, r := range reps {
			if r == nil || r != reps[0] {
				t.Errorf("request %d got report %p, want the shared %p", i, r, reps[0])
			}
		}
	})

	t.Run("the least recently used study goes when a third arrives", func(t *testing.T) {
		c := newStudyCache(2)
		ctx := t.Context()
		for _, s := range []string{"B", "C", "B", "D", "B", "C"} {
			if _, err := c.get(ctx, s, "v1", compute(s, nil)); err != nil {
				t.Fatal(err)
			}
		}
		// B, C cached; B used; D evicts C; B used; C computed again.
		if got := []int{count("B"), count("C"), count("D")}; !slices.Equal(got, []int{1, 2, 1}) {
			t.Errorf("computations of B, C, D: %v, want [1 2 1]", got)
		}
	})

	t.Run("a study that received instances since is computed again", func(t *testing.T) {
		c := newStudyCache(2)
		for _, v := range []string{"v1", "v1", "v2"} {
			if _, err := c.get(t.Context(), "E", v, compute("E", nil)); err != nil {
				t.Fatal(err)
			}
		}
		if n := count("E"); n != 2 {
			t.Errorf("computed %d times, want 2 (v1 once, v2 once)", n)
		}
	})

	t.Run("a failed computation is not kept", func(t *testing.T) {
		c := newStudyCache(2)
		calls := 0
		fail := func(context.Context) (*audit.Report, error) { calls++; return nil, errors.New("disk gone") }
		for range 2 {
			if _, err := c.get(t.Context(), "F", "v1", fail); err == nil || err.Error() != "disk gone" {
				t.Errorf("get = %v, want the computation's error", err)
			}
		}
		if calls != 2 {
			t.Errorf("computed %d times, want 2 (the failure was not cached)", calls)
		}
	})
}
