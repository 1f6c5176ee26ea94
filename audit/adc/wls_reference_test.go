package adc

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// referencePython is the interpreter of the Debian package python3-numpy,
// not whatever python3 comes first on PATH.
const referencePython = "/usr/bin/python3"

// TestFitWLSMatchesNumpyOnNoisyData compares FitWLS, voxel by voxel, with
// an independent weighted least-squares fit in numpy
// (testdata/wls_reference.py at the repository root) on noisy signals,
// where the weights matter: with weights S² of the measured signal (the
// weighting FitWLS cites: Chad & Pasternak, ISMRM 2020 #4415) the two
// must agree to 1e-5 relative; the same data fitted unweighted must
// differ from them, or the test could not tell the weights apart.
func TestFitWLSMatchesNumpyOnNoisyData(t *testing.T) {
	out, err := exec.Command(referencePython, "-c", "import numpy").CombinedOutput()
	if err != nil {
		msg := "the numpy reference needs " + referencePython + " with numpy: install the Debian package python3-numpy (" + err.Error() + ": " + string(out) + ")"
		if os.Getenv("CI") == "true" {
			t.Fatal(msg)
		}
		t.Skip(msg)
	}

	// A brain-like multi-b protocol with Gaussian noise of σ = 40 on
	// S0 = 1000 (SNR 25): invented test signals, the model
	// S = S0·exp(-b·ADC) plus noise.
	b := []float64{0, 500, 1000, 1500, 2000}
	const voxels, floor = 400, 1
	rng := rand.New(rand.NewPCG(7, 11))
	signals := make([][]float32, len(b))
	for k := range signals {
		signals[k] = make([]float32, voxels)
	}
	for i := range voxels {
		adc := 0.6e-3 + 0.6e-3*float64(i)/voxels // 0.6e-3 .. 1.2e-3 mm²/s
		for k, bk := range b {
			signals[k][i] = float32(1000*math.Exp(-bk*adc) + 40*rng.NormFloat64())
		}
	}

	in := struct {
		B       []float64   `json:"b"`
		Signals [][]float32 `json:"signals"`
	}{b, signals}
	path := filepath.Join(t.TempDir(), "signals.json")
	data, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o600); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(referencePython, "../../testdata/wls_reference.py", path, "1")
	cmd.Stderr = os.Stderr
	got, err := cmd.Output()
	if err != nil {
		t.Fatalf("wls_reference.py: %v", err)
	}
	var ref struct{ WLS, OLS []*float64 }
	if err := json.Unmarshal(got, &ref); err != nil || len(ref.WLS) != voxels || len(ref.OLS) != voxels {
		t.Fatalf("wls_reference.py printed %.200q: %v", got, err)
	}

	dst := make([]float32, voxels)
	FitWLS(dst, nil, signals, b, floor)
	compared, apart := 0, 0
	for i := range voxels {
		if ref.WLS[i] == nil {
			if !math.IsNaN(float64(dst[i])) {
				t.Errorf("voxel %d: Go ADC %g, reference undefined", i, dst[i])
			}
			continue
		}
		want, ols := *ref.WLS[i], *ref.OLS[i]
		compared++
		if rel := math.Abs(float64(dst[i])-want) / math.Abs(want); !(rel <= 1e-5) { // reference: testdata/wls_reference.py (numpy lstsq, weights S²)
			t.Errorf("voxel %d: Go ADC %.8g, numpy weighted fit %.8g (relative %.2g)", i, dst[i], want, rel)
		}
		if math.Abs(ols-want)/math.Abs(want) > 1e-3 {
			apart++
		}
	}
	if compared < voxels*9/10 {
		t.Errorf("compared %d of %d voxels; the noise left too few defined", compared, voxels)
	}
	// The data must separate the weightings, or equal weights would pass.
	if apart < compared/2 {
		t.Errorf("the unweighted fit differs from the weighted one by more than 0.1 %% in only %d of %d voxels; the test data cannot tell the weights apart", apart, compared)
	}
	t.Logf("%d voxels compared; unweighted and weighted fits differ by > 0.1 %% in %d", compared, apart)
}
