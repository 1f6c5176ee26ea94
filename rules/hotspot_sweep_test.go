package rules

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"testing"

	"dwiaudit/audit/phantom"
)

// The sweep of b0 artifact strength (issue 5 acceptance): plant each
// artifact kind at increasing strength over many seeds, report the
// smallest departure detected in at least 95% of them, and count the
// findings on at least 50 clean series.
const (
	// hotspotSweepSeeds per strength: 20, so that 95% is 19 of 20.
	hotspotSweepSeeds = 20
	// hotspotSweepCleanSeries: the acceptance asks for at least 50.
	hotspotSweepCleanSeries = 50
	// hotspotSweepMatrix keeps the run short: 64×64 (3.75 mm pixels, the
	// coarsest clinical DWI matrix, common practice), the phantom's
	// default 20 slices (3 of them carry the artifact) and SNR 60.
	// Multi-frame, one file per volume: the pixels are those of the
	// classic study (phantom.Write), and 5 files write and read faster
	// than 100.
	hotspotSweepMatrix = 64
	// hotspotSweepDetected is the share of seeds that counts as
	// detected.
	hotspotSweepDetected = 0.95
)

// hotspotSweepBound is what the test asserts: the weakest strength
// detected in 95% of seeds must be at least this close to 1. With the
// defaults the ADC test binds at b = 1000 (MinADCShift 0.25e-3 is
// k = 1.28 or 0.78 at the artifact's peak, and the region's median lies
// below the peak of a tapered artifact); the bounds leave a step of room
// beyond what was measured (1.35 and 0.75, logged by the test) and stay
// short of the phantom cases' own strengths (about 1.67 and 0.6).
func hotspotSweepBound(c phantom.Case) float64 {
	if c == phantom.CaseB0ArtifactAliasing {
		return 1.4
	}
	return 0.7
}

// hotspotSweepStrengths are the k tried per kind, weakest first: steps
// of 0.05 around the threshold, then the case's default.
func hotspotSweepStrengths(c phantom.Case) []float64 {
	if c == phantom.CaseB0ArtifactAliasing {
		return []float64{1.25, 1.3, 1.35, 1.4, 1.67}
	}
	return []float64{0.8, 0.75, 0.7, 0.6}
}

// hotspotSweepRun is one study of the sweep and what the rule said.
type hotspotSweepRun struct {
	opt          phantom.Options
	hits, strays int // findings on the artifact, elsewhere
	err          error
}

// hotspotSweepAll builds and checks every study of runs on GOMAXPROCS
// goroutines, each in its own folder under root.
func hotspotSweepAll(root string, runs []hotspotSweepRun) {
	rule, cfg := NewB0OnlyHotspot(), &Config{}
	next := make(chan int)
	var wg sync.WaitGroup
	for range runtime.GOMAXPROCS(0) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				r := &runs[i]
				dir := filepath.Join(root, fmt.Sprint(i))
				study, st, err := hotspotBuildStudy(dir, r.opt)
				if err != nil {
					r.err = err
					continue
				}
				for _, f := range rule.Check(study, cfg) {
					if r.opt.B0ArtifactK != 0 && hotspotOverlapsArtifact(f, st.Truth, r.opt.B0ArtifactK) {
						r.hits++
					} else {
						r.strays++
					}
				}
				r.err = os.RemoveAll(dir) // keep the disk use to one study per goroutine
			}
		}()
	}
	for i := range runs {
		next <- i
	}
	close(next)
	wg.Wait()
}

// hotspotOverlapsArtifact reports whether a finding's region overlaps
// the artifact's core: the voxels whose noiseless b0 departs from the
// tissue's by at least half the artifact's peak departure (Truth.B0
// against Truth.S0). Truth.Planted is not used because it labels only
// voxels changed by more than 5%, which a weak artifact barely has.
func hotspotOverlapsArtifact(f Finding, tr *phantom.Truth, k float64) bool {
	if f.Region == nil {
		return false
	}
	half := math.Abs(k-1) / 2
	r := f.Region
	for _, z := range r.Slices {
		for row := r.BoxPixels[0]; row <= r.BoxPixels[2]; row++ {
			for col := r.BoxPixels[1]; col <= r.BoxPixels[3]; col++ {
				i := tr.Index(row, col, z)
				if s0 := float64(tr.S0[i]); s0 > 0 && math.Abs(float64(tr.B0[i])/s0-1) >= half {
					return true
				}
			}
		}
	}
	return false
}

// TestHotspotSweep is the strength sweep and the false-positive count:
// 230 studies, about 10 s on 2 cores. -short skips it, saying so.
func TestHotspotSweep(t *testing.T) {
	if testing.Short() {
		t.Skip("the b0 artifact strength sweep (230 studies, about 10 s) does not run with -short")
	}
	for _, kind := range []phantom.Case{phantom.CaseB0ArtifactAliasing, phantom.CaseB0ArtifactDropout} {
		t.Run(fmt.Sprintf("%s is found in 95%% of seeds at a strength no weaker than %g", kind, hotspotSweepBound(kind)), func(t *testing.T) {
			var runs []hotspotSweepRun
			for _, k := range hotspotSweepStrengths(kind) {
				for seed := range int64(hotspotSweepSeeds) {
					runs = append(runs, hotspotSweepRun{opt: phantom.Options{Case: kind, B0ArtifactK: k, Matrix: hotspotSweepMatrix, MultiFrame: true, Seed: 1000 + seed}})
				}
			}
			hotspotSweepAll(t.TempDir(), runs)
			smallest := math.NaN()
			var rates []string
			for s, k := range hotspotSweepStrengths(kind) {
				hits, strays := 0, 0
				for _, r := range runs[s*hotspotSweepSeeds : (s+1)*hotspotSweepSeeds] {
					if r.err != nil {
						t.Fatal(r.err)
					}
					if r.hits > 0 {
						hits++
					}
					strays += r.strays
				}
				rates = append(rates, fmt.Sprintf("k=%g: %d/%d", k, hits, hotspotSweepSeeds))
				if float64(hits)/hotspotSweepSeeds >= hotspotSweepDetected && math.IsNaN(smallest) {
					smallest = k
				}
				// A finding away from the artifact is a false positive.
				if strays > 0 {
					t.Errorf("k = %g: %d findings away from the artifact", k, strays)
				}
			}
			t.Logf("%s, %d×%d, SNR %g, detected in: %v", kind, hotspotSweepMatrix, hotspotSweepMatrix, phantom.DefaultSNR, rates)
			t.Logf("%s: smallest b0 departure detected in >= 95%% of %d seeds: k = %g (%+.0f%%, ADC %+.2e mm2/s at the peak at b = 1000)",
				kind, hotspotSweepSeeds, smallest, 100*(smallest-1), math.Log(smallest)/1000)
			// The case's own strength (the last) must be found in every seed.
			last := runs[len(runs)-hotspotSweepSeeds:]
			for _, r := range last {
				if r.hits == 0 {
					t.Errorf("k = %g seed %d: not found", r.opt.B0ArtifactK, r.opt.Seed)
				}
			}
			if bound := hotspotSweepBound(kind); math.IsNaN(smallest) || math.Abs(smallest-1) > math.Abs(bound-1) {
				t.Errorf("smallest strength found in 95%% of seeds %v, want at most %v from 1", smallest, bound)
			}
		})
	}
	t.Run(fmt.Sprintf("%d clean series give no finding", hotspotSweepCleanSeries), func(t *testing.T) {
		runs := make([]hotspotSweepRun, hotspotSweepCleanSeries)
		for i := range runs {
			runs[i].opt = phantom.Options{Matrix: hotspotSweepMatrix, MultiFrame: true, Seed: 2000 + int64(i)}
		}
		hotspotSweepAll(t.TempDir(), runs)
		findings, series := 0, 0
		for _, r := range runs {
			if r.err != nil {
				t.Fatal(r.err)
			}
			findings += r.strays
			if r.strays > 0 {
				series++
			}
		}
		t.Logf("false positives over %d clean series (%d×%d, SNR %g): %d findings in %d series", hotspotSweepCleanSeries, hotspotSweepMatrix, hotspotSweepMatrix, phantom.DefaultSNR, findings, series)
		if findings > 0 {
			t.Errorf("%d findings on %d clean series", findings, hotspotSweepCleanSeries)
		}
	})
}
