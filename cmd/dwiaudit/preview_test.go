package main

import (
	"encoding/json"
	"image"
	"image/png"
	"io"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"testing"

	"dwiaudit/audit/phantom"
	"dwiaudit/audit/preview"
	"dwiaudit/audit/web"
	"dwiaudit/rules"
)

// getPreview fetches a preview; the body is the PNG on 200, else the
// JSON error.
func getPreview(t *testing.T, url string) (*http.Response, image.Image, web.ErrorBody) {
	t.Helper()
	res, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	var eb web.ErrorBody
	if res.StatusCode != http.StatusOK {
		if err := json.NewDecoder(res.Body).Decode(&eb); err != nil {
			t.Fatalf("GET %s: %d with a body that is not JSON: %v", url, res.StatusCode, err)
		}
		return res, nil, eb
	}
	img, err := png.Decode(res.Body)
	if err != nil {
		t.Fatalf("GET %s: 200 but not a PNG: %v", url, err)
	}
	io.Copy(io.Discard, res.Body)
	return res, img, eb
}

// outlined counts the pixels in the preview's outline colour.
func outlined(img image.Image) int {
	n := 0
	b := img.Bounds()
	want := preview.OutlineColor
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if uint8(r>>8) == want.R && uint8(g>>8) == want.G && uint8(bl>>8) == want.B {
				n++
			}
		}
	}
	return n
}

func TestPreviewEndpointOfANodeThatAuditedAPhantom(t *testing.T) {
	src := t.TempDir()
	hot, err := phantom.Write(src+"/hot", phantom.Options{Case: phantom.CaseB0ArtifactAliasing, Matrix: 64, Slices: 12, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	noB0, err := phantom.Write(src+"/nob0", phantom.Options{Case: phantom.CaseNoB0, Matrix: 32, Slices: 4, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	n := startNode(t, t.TempDir(), "--settle", "1s")
	if r := runCLI(t, "send", "--to", n.dicomAddr, "--called-ae", testAE, "--quiet", src); r.code != exitOK {
		t.Fatalf("send exited %d", r.code)
	}
	var dwiUID string
	for _, s := range hot.Series {
		if s.Number == 2 { // the DWI series (audit/phantom: series numbers by role)
			dwiUID = s.UID
		}
	}
	a := awaitFinding(t, n, dwiUID, rules.HotspotID, findingsWait)
	var fs []rules.Finding
	if err := json.Unmarshal(a.Findings, &fs); err != nil {
		t.Fatal(err)
	}
	var region *rules.Region
	for _, f := range fs {
		if f.Rule == rules.HotspotID {
			region = f.Region
		}
	}
	if region == nil || len(region.Slices) == 0 {
		t.Fatalf("the stored %s finding has no region: %+v", rules.HotspotID, fs)
	}
	base := n.httpURL + "/api/v1/series/" + dwiUID + "/preview.png"

	t.Run("without a slice the first slice of the finding's region is drawn, outlined", func(t *testing.T) {
		res, img, eb := getPreview(t, base)
		if res.StatusCode != http.StatusOK {
			t.Fatalf("GET: %d %+v, want 200", res.StatusCode, eb)
		}
		if ct := res.Header.Get("Content-Type"); ct != "image/png" {
			t.Errorf("Content-Type %q, want image/png", ct)
		}
		if cc := res.Header.Get("Cache-Control"); cc != "private, max-age=60" {
			t.Errorf("Cache-Control %q, want private, max-age=60", cc)
		}
		if got := res.Header.Get("X-Preview-Slice"); got != strconv.Itoa(region.Slices[0]) {
			t.Errorf("slice drawn %s, want the region's first %d", got, region.Slices[0])
		}
		// Four 64-voxel panels at 4 pixels per voxel side by side.
		if w := img.Bounds().Dx(); w < 4*64*4 {
			t.Errorf("picture %d pixels wide, want at least four 256-pixel panels", w)
		}
		// At least the four outlines' inner rings (one per panel).
		box := region.BoxPixels
		perimeter := 2 * ((box[2]-box[0]+1)*4 + (box[3]-box[1]+1)*4)
		if got := outlined(img); got < 4*perimeter {
			t.Errorf("%d outline pixels, want at least %d (the region's box on four panels)", got, 4*perimeter)
		}
	})

	outside := -1
	for z := range 12 {
		if !slices.Contains(region.Slices, z) {
			outside = z
			break
		}
	}
	t.Run("a slice outside the region has no outline", func(t *testing.T) {
		res, img, eb := getPreview(t, base+"?slice="+strconv.Itoa(outside))
		if res.StatusCode != http.StatusOK {
			t.Fatalf("GET slice %d: %d %+v", outside, res.StatusCode, eb)
		}
		if got := outlined(img); got != 0 {
			t.Errorf("slice %d (region on %v): %d outline pixels, want 0", outside, region.Slices, got)
		}
	})

	var noB0UID string
	for _, s := range noB0.Series {
		if s.Number == 2 { // the DWI series, without its b0
			noB0UID = s.UID
		}
	}
	for _, tc := range []struct {
		name, url string
		status    int
		says      string
	}{
		{"an unknown series is 404", n.httpURL + "/api/v1/series/1.2.826.0.1.3680043.10.999.1/preview.png", http.StatusNotFound, "no series"},
		{"a slice past the last is 400 with the valid range", base + "?slice=12", http.StatusBadRequest, "0..11"},
		{"a slice that is not a number is 400", base + "?slice=middle", http.StatusBadRequest, "not a slice index"},
		{"a negative slice is 400", base + "?slice=-1", http.StatusBadRequest, "not a slice index"},
		{"a series without b0 is 422 with the reason", n.httpURL + "/api/v1/series/" + noB0UID + "/preview.png", http.StatusUnprocessableEntity, "could not be computed"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			res, _, eb := getPreview(t, tc.url)
			if res.StatusCode != tc.status || eb.Status != tc.status || !strings.Contains(eb.Error, tc.says) {
				t.Errorf("GET %s: %d %+v, want %d saying %q", tc.url, res.StatusCode, eb, tc.status, tc.says)
			}
			if ct := res.Header.Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
				t.Errorf("error Content-Type %q, want JSON", ct)
			}
		})
	}

	t.Run("a POST is refused with 405", func(t *testing.T) {
		res, err := http.Post(base, "text/plain", strings.NewReader(""))
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		if res.StatusCode != http.StatusMethodNotAllowed {
			t.Errorf("POST: %d, want 405", res.StatusCode)
		}
	})
}

// BenchmarkPreviewEndpoint measures GET preview.png on a `dwiaudit
// serve` process holding three 256x256x20 aliasing phantoms (b0, three
// directions and trace: 100 classic files each): "cached" asks one
// study over and over (the cache holds it), "computed" cycles through
// the three studies, which the two-study cache cannot hold, so every
// request audits a study's files again.
func BenchmarkPreviewEndpoint(b *testing.B) {
	src := b.TempDir()
	var uids []string
	for seed := range int64(3) {
		st, err := phantom.Write(src+"/"+strconv.FormatInt(seed, 10), phantom.Options{Case: phantom.CaseB0ArtifactAliasing, Matrix: 256, Slices: 20, Seed: seed + 1})
		if err != nil {
			b.Fatal(err)
		}
		for _, s := range st.Series {
			if s.Number == 2 {
				uids = append(uids, s.UID)
			}
		}
	}
	n := startNode(b, b.TempDir(), "--settle", "1h") // no pipeline audit while measuring
	if r := runCLI(b, "send", "--to", n.dicomAddr, "--called-ae", testAE, "--quiet", src); r.code != exitOK {
		b.Fatalf("send exited %d", r.code)
	}
	get := func(uid string) {
		res, err := http.Get(n.httpURL + "/api/v1/series/" + uid + "/preview.png?slice=10")
		if err != nil {
			b.Fatal(err)
		}
		io.Copy(io.Discard, res.Body)
		res.Body.Close()
		if res.StatusCode != http.StatusOK {
			b.Fatalf("GET: %d", res.StatusCode)
		}
	}
	b.Run("cached", func(b *testing.B) {
		get(uids[0])
		for b.Loop() {
			get(uids[0])
		}
	})
	b.Run("computed", func(b *testing.B) {
		i := 0
		for b.Loop() {
			get(uids[i%len(uids)])
			i++
		}
	})
}
