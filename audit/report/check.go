package report

// The report of `dwiaudit check`, the audit of DICOM files on disk with
// no server: tables for a technologist at a workstation (PrintCheck)
// and a stable JSON for scripts (CheckBody).

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"

	"dwiaudit/audit"
	"dwiaudit/audit/record"
	"dwiaudit/rules"
)

// CheckResponse is the JSON of `dwiaudit check --format json`: a stable
// interface for scripts. Add nothing here without a new format version;
// TestCheckJSONIsStable pins every key and type.
type CheckResponse struct {
	Series   []CheckSeries  `json:"series"`
	Findings []CheckFinding `json:"findings"`
}

// CheckSeries is one diffusion series.
type CheckSeries struct {
	StudyUID          string        `json:"study_uid"`
	SeriesUID         string        `json:"series_uid"`
	SeriesNumber      int           `json:"series_number"`
	SeriesDescription string        `json:"series_description"`
	Scanner           string        `json:"scanner"`
	Protocol          string        `json:"protocol"` // matched protocol or phantom profile; "" when none
	BValues           []float64     `json:"bvalues"`  // nominal, s/mm², ascending; [] when none
	Measures          CheckMeasures `json:"measures"`
	// Volumes is the gradient table: one entry per acquired volume
	// (nominal and measured b-value, kind, direction or null, images
	// and slices); [] when none.
	Volumes []record.Volume `json:"volumes"`
}

// CheckMeasures are a series' measures; null where undefined (not
// computed, empty region, no noise estimate).
type CheckMeasures struct {
	TissueADCMedian *float64 `json:"tissue_adc_median"` // mm²/s, e.g. 0.00079
	CSFADC          *float64 `json:"csf_adc"`           // mm²/s
	B0SNR           *float64 `json:"b0_snr"`
}

// CheckFinding is one finding. Measured and Expected are numbers (ADC
// in mm²/s, b-values in s/mm², ratios as fractions), lists of numbers,
// strings or null.
type CheckFinding struct {
	Rule      string `json:"rule"`
	Severity  string `json:"severity"`
	StudyUID  string `json:"study_uid"`
	SeriesUID string `json:"series_uid"`
	Message   string `json:"message"`
	Measured  any    `json:"measured"`
	Expected  any    `json:"expected"`
}

// tissueOrNaN is a tissue measure of s, NaN (null, "—") for a phantom
// series: its mask is water, and its measures are the phantom's.
func tissueOrNaN(s audit.SeriesReport, v float64) float64 {
	if s.IsPhantom() {
		return math.NaN()
	}
	return v
}

// CheckBody turns a report into the JSON body.
func CheckBody(rep *audit.Report) CheckResponse {
	out := CheckResponse{Series: []CheckSeries{}, Findings: []CheckFinding{}}
	for _, s := range rep.Series {
		bv := s.BValues
		if bv == nil {
			bv = []float64{}
		}
		out.Series = append(out.Series, CheckSeries{
			StudyUID: s.StudyUID, SeriesUID: s.SeriesUID, SeriesNumber: s.SeriesNumber,
			SeriesDescription: s.SeriesDescription, Scanner: s.Scanner, Protocol: s.Protocol,
			BValues: bv,
			Volumes: volumesOrEmpty(audit.VolumeRecords(s.Volumes)),
			Measures: CheckMeasures{
				TissueADCMedian: finite(tissueOrNaN(s, s.Measures.ParenchymaMedianADC)),
				CSFADC:          finite(tissueOrNaN(s, s.Measures.CSFADC)),
				B0SNR:           finite(s.Measures.B0SNR),
			},
		})
	}
	for _, f := range rep.Findings {
		out.Findings = append(out.Findings, CheckFinding{
			Rule: f.Rule, Severity: f.Severity.String(), StudyUID: f.StudyUID, SeriesUID: f.SeriesUID,
			Message: f.Message, Measured: jsonValue(f.Measured), Expected: jsonValue(f.Expected),
		})
	}
	return out
}

func volumesOrEmpty(v []record.Volume) []record.Volume {
	if v == nil {
		return []record.Volume{}
	}
	return v
}

// finite is v, or nil (JSON null) for NaN and infinities, which JSON
// cannot carry.
func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// jsonValue makes a finding's machine-readable value encodable: NaN and
// infinities become null (in lists too); anything json cannot encode
// becomes its printed form.
func jsonValue(v any) any {
	switch x := v.(type) {
	case nil, string, bool, int, int64:
		return x
	case float64:
		if p := finite(x); p != nil {
			return *p
		}
		return nil
	case float32:
		return jsonValue(float64(x))
	case []float64:
		out := make([]any, len(x))
		for i, e := range x {
			out[i] = jsonValue(e)
		}
		return out
	case []int:
		return x
	case []any:
		out := make([]any, len(x))
		for i, e := range x {
			out[i] = jsonValue(e)
		}
		return out
	}
	if _, err := json.Marshal(v); err != nil {
		return fmt.Sprint(v)
	}
	return v
}

// PrintCheck writes the text report: the series, the findings, a count
// and the caution line.
func PrintCheck(w io.Writer, rep *audit.Report) {
	studies := map[string]bool{}
	for _, s := range rep.Series {
		studies[s.StudyUID] = true
	}
	fmt.Fprintf(w, "%s in %s (%s", plural(len(rep.Series), "diffusion series", "diffusion series"),
		plural(len(studies), "study", "studies"), plural(rep.Files, "file", "files"))
	if rep.NotDICOM > 0 {
		fmt.Fprintf(w, ", %d not DICOM, skipped", rep.NotDICOM)
	}
	fmt.Fprintln(w, ")")

	// Series, one table per study (UIDs are too long for a column).
	for i := 0; i < len(rep.Series); {
		study := rep.Series[i].StudyUID
		fmt.Fprintf(w, "\nstudy %s\n", orDash(study))
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  SERIES\tDESCRIPTION\tSCANNER\tPROTOCOL\tB-VALUES\tTISSUE ADC\tCSF ADC\tB0 SNR\tNOTE")
		for ; i < len(rep.Series) && rep.Series[i].StudyUID == study; i++ {
			s := rep.Series[i]
			fmt.Fprintf(tw, "  %d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\n", s.SeriesNumber, orDash(s.SeriesDescription), orDash(s.Scanner),
				orDash(s.Protocol), bvalueList(s.BValues), adcText(tissueOrNaN(s, s.Measures.ParenchymaMedianADC)), adcText(tissueOrNaN(s, s.Measures.CSFADC)),
				numberText(s.Measures.B0SNR, 1), noteText(s.CannotCompute))
		}
		tw.Flush()
	}
	if len(rep.Series) > 0 {
		fmt.Fprintln(w, "\nADC in 1e-3 mm²/s (tissue: median over parenchyma; CSF: high percentile inside the head).")
	}
	// Derived maps and non-image objects: listed, not audited.
	for _, d := range rep.Derived {
		fmt.Fprintf(w, "series %d %s of study %s: %s, %s, not audited\n", d.SeriesNumber, orDash(d.SeriesDescription), d.StudyUID,
			d.Kind, plural(d.Images, "image", "images"))
	}
	if n := len(rep.Ignored); n > 0 {
		fmt.Fprintf(w, "%s ignored, not images the audit reads (SOP Class %s", plural(n, "DICOM file", "DICOM files"), rep.Ignored[0].SOPClassUID)
		if n > 1 {
			fmt.Fprint(w, ", ...")
		}
		fmt.Fprintln(w, ")")
	}

	// Findings, grouped by study the same way.
	fmt.Fprintln(w)
	if len(rep.Findings) == 0 {
		fmt.Fprintln(w, "No findings.")
	}
	for i := 0; i < len(rep.Findings); {
		study := rep.Findings[i].StudyUID
		if i > 0 {
			fmt.Fprintln(w)
		}
		if study == "" {
			fmt.Fprintln(w, "files of no known study")
		} else {
			fmt.Fprintf(w, "findings of study %s\n", study)
		}
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  SEVERITY\tRULE\tSERIES\tFINDING")
		for ; i < len(rep.Findings) && rep.Findings[i].StudyUID == study; i++ {
			f := rep.Findings[i]
			series := "-"
			if f.SeriesUID != "" {
				series = strconv.Itoa(f.SeriesNumber)
			}
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\n", f.Severity, f.Rule, series, oneLine(f.Message))
		}
		tw.Flush()
	}
	counts := map[rules.Severity]int{}
	for _, f := range rep.Findings {
		counts[f.Severity]++
	}
	fmt.Fprintf(w, "\n%s, %s, %s.\n", plural(counts[rules.SeverityError], "error", "errors"),
		plural(counts[rules.SeverityWarning], "warning", "warnings"), plural(counts[rules.SeverityInfo], "note", "notes"))
	fmt.Fprintln(w, Caution)
}

// noteText shortens why a series was not computed to fit a column; the
// finding says it whole.
func noteText(s string) string {
	const width = 40 // a column, not a paragraph
	if s == "" {
		return ""
	}
	s = "not computed: " + oneLine(s)
	if r := []rune(s); len(r) > width {
		return string(r[:width-1]) + "…"
	}
	return s
}

func orDash(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

// oneLine keeps a table row on one line.
func oneLine(s string) string { return strings.Join(strings.Fields(s), " ") }

func bvalueList(bs []float64) string {
	if len(bs) == 0 {
		return "-"
	}
	parts := make([]string, len(bs))
	for i, b := range bs {
		parts[i] = strconv.FormatFloat(b, 'f', -1, 64)
	}
	return strings.Join(parts, ",")
}

// adcText shows an ADC in 1e-3 mm²/s with three decimals, "-" when
// undefined.
func adcText(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "-"
	}
	return strconv.FormatFloat(v*1e3, 'f', 3, 64)
}

func numberText(v float64, decimals int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "-"
	}
	return strconv.FormatFloat(v, 'f', decimals, 64)
}
