package web

// The study page: every series of a study with its current audit.

import (
	"encoding/json"
	"fmt"
	"net/http"
	"net/url"
	"strconv"
	"strings"

	"dwiaudit/audit/record"
	"dwiaudit/audit/report"
	"dwiaudit/rules"
)

// storedFinding is the part of a stored rules.Finding the page shows;
// values stay JSON for report.Value, and a severity this version does
// not know still shows.
type storedFinding struct {
	Rule     string          `json:"rule"`
	Severity string          `json:"severity"`
	Message  string          `json:"message"`
	Measured json.RawMessage `json:"measured"`
	Expected json.RawMessage `json:"expected"`
	Region   *rules.Region   `json:"region"`
}

// measureView is one measure as a row of the series' table.
type measureView struct {
	Name, Value string
}

// volumeView is one row of a series' gradient table.
type volumeView struct {
	BValue, Measured, Kind, Direction string
	Images, Slices                    int
}

// findingView is one finding on the study page.
type findingView struct {
	Rule, Severity, Message, Measured, Expected string
	Slices                                      string // the region's slices, "" without a region
}

// seriesView is one series on the study page.
type seriesView struct {
	UID         string
	Anchor      string
	Number      int
	Description string
	Scanner     string
	Instances   int
	Protocol    string
	BValues     string
	Audited     bool
	AuditTime   string
	Audits      int // how many audits the series has had
	Test        bool
	Measures    []measureView
	Volumes     []volumeView // the gradient table
	Findings    []findingView
	Worst       string // the highest severity among the findings, "" for none
	Preview     string // the preview's URL, "" when there is none to show
	PreviewNote string // why there is no preview, or what the preview shows
	NotComputed string // the reason the series could not be computed
	Derived     string // for a series of derived maps, its kind ("FA map"): listed, not audited
	ScannerLink string
}

// studyView is the body of the study page.
type studyView struct {
	UID       string
	StudyDate string
	StudyTime string
	Accession string
	PatientID string // masked
	Series    []seriesView
	Findings  int
}

func (h *pagesHandler) study(w http.ResponseWriter, r *http.Request) {
	uid := r.PathValue("uid")
	st, err := h.opt.Store.Study(uid)
	if err != nil {
		h.storeFailed(w, "study", err)
		return
	}
	v := studyView{
		UID:       st.StudyInstanceUID,
		StudyDate: formatStudyDate(st.StudyDate),
		StudyTime: formatStudyTime(st.StudyTime),
		Accession: st.AccessionNumber,
		PatientID: maskPatientID(st.PatientID),
	}
	var measures []record.Measures
	for _, se := range st.Series {
		sv := seriesView{
			UID:         se.SeriesInstanceUID,
			Anchor:      "series-" + se.SeriesInstanceUID,
			Number:      se.SeriesNumber,
			Description: se.SeriesDescription,
			Scanner:     se.ScannerLabel,
			Instances:   se.Instances,
		}
		if se.ScannerLabel != "" {
			sv.ScannerLink = "/scanners/" + url.PathEscape(se.ScannerLabel)
		}
		audits, err := h.opt.Store.SeriesAudits(se.SeriesInstanceUID)
		if err != nil {
			h.storeFailed(w, "study", err)
			return
		}
		if len(audits) > 0 {
			cur := audits[len(audits)-1]
			sv.Audited, sv.Audits, sv.Test = true, len(audits), cur.TestPatient
			sv.AuditTime = cur.AuditTime.In(h.opt.Location).Format("2006-01-02 15:04")
			if err := h.fillSeries(&sv, cur.Findings, cur.Measures); err != nil {
				h.storeFailed(w, "study", err)
				return
			}
			if m, ok, err := record.DecodeMeasures(cur.Measures); err == nil && ok {
				measures = append(measures, m) // read once already by fillSeries
			}
			v.Findings += len(sv.Findings)
		}
		v.Series = append(v.Series, sv)
	}
	// Series of derived maps have no audit of their own: the audits of
	// their study's diffusion series name them.
	derived := map[string]string{}
	for _, m := range measures {
		for _, d := range m.Derived {
			derived[d.SeriesUID] = d.Kind
		}
	}
	for i := range v.Series {
		if k := derived[v.Series[i].UID]; k != "" && !v.Series[i].Audited {
			v.Series[i].Derived = k
		}
	}
	h.render(w, http.StatusOK, "study", "Study of "+v.StudyDate, "", v)
}

// fillSeries adds an audit's measures, findings and preview to sv.
func (h *pagesHandler) fillSeries(sv *seriesView, findingsJSON, measuresJSON json.RawMessage) error {
	var fs []storedFinding
	if len(findingsJSON) > 0 {
		if err := json.Unmarshal(findingsJSON, &fs); err != nil {
			return fmt.Errorf("web: findings of a series: %w", err)
		}
	}
	var m *record.Measures
	switch ms, ok, err := record.DecodeMeasures(measuresJSON); {
	case err != nil:
		return fmt.Errorf("web: measures of a series: %w", err)
	case ok:
		m = &ms
	}
	previewSlice := -1
	worst := 0
	for _, f := range fs {
		fv := findingView{
			Rule: f.Rule, Severity: f.Severity, Message: f.Message,
			Measured: displayValue(report.Value(f.Rule, f.Measured, f.Expected, true)),
			Expected: displayValue(report.Value(f.Rule, f.Measured, f.Expected, false)),
		}
		if f.Region != nil && len(f.Region.Slices) > 0 {
			fv.Slices = sliceList(f.Region.Slices)
			if previewSlice < 0 {
				previewSlice = f.Region.Slices[0]
			}
		}
		if r := report.SeverityRank(f.Severity); r > worst {
			worst, sv.Worst = r, f.Severity
		}
		sv.Findings = append(sv.Findings, fv)
	}
	if m == nil {
		sv.PreviewNote = "No preview: this series has no computed maps."
		return nil
	}
	sv.Protocol = m.Protocol
	if len(m.BValues) > 0 {
		bs := make([]string, len(m.BValues))
		for i, b := range m.BValues {
			bs[i] = strconv.FormatFloat(b, 'f', -1, 64)
		}
		sv.BValues = strings.Join(bs, ", ") + " s/mm²"
	}
	for _, v := range m.Volumes {
		vv := volumeView{
			BValue: strconv.FormatFloat(v.BValue, 'f', -1, 64), Kind: v.Kind, Direction: "—",
			Measured: strconv.FormatFloat(v.BValueMeasured, 'f', 3, 64), Images: v.Images, Slices: v.Slices,
		}
		if d := v.Direction; d != nil {
			vv.Direction = fmt.Sprintf("(%.3f, %.3f, %.3f)", d[0], d[1], d[2])
		}
		sv.Volumes = append(sv.Volumes, vv)
	}
	if m.PhantomADC != nil || m.PhantomExpectedADC != nil {
		// A phantom is water, not tissue: its own measures only.
		sv.Measures = []measureView{
			{"Phantom central ADC", formatADC(m.PhantomADC)},
			{"Phantom expected ADC", formatADC(m.PhantomExpectedADC)},
			{"Phantom ADC uniformity", formatNumber(m.PhantomUniformity, 3)},
		}
	} else {
		csf := formatADC(m.CSFADC)
		if m.CSFADC == nil && m.CSFADCNote != "" {
			csf += " (" + m.CSFADCNote + ")"
		}
		sv.Measures = []measureView{
			{"Parenchyma median ADC", formatADC(m.TissueADCMedian)},
			{"CSF ADC", csf},
		}
	}
	sv.Measures = append(sv.Measures,
		measureView{"b0 SNR", formatNumber(m.B0SNR, 1)},
		measureView{"High-b tissue SNR", formatNumber(m.HighBTissueSNR, 1)})
	if m.CannotCompute != "" {
		sv.NotComputed = m.CannotCompute
		sv.PreviewNote = "No preview: the maps could not be computed."
		return nil
	}
	sv.Preview = "/api/v1/series/" + url.PathEscape(sv.UID) + "/preview.png"
	if previewSlice >= 0 {
		sv.Preview += "?slice=" + strconv.Itoa(previewSlice)
		sv.PreviewNote = fmt.Sprintf("Slice %d, the first slice of the first finding's region (outlined).", previewSlice)
	} else {
		sv.PreviewNote = "The middle slice."
	}
	return nil
}

// sliceList writes slice indexes compactly: 3–7, 9.
func sliceList(s []int) string {
	var parts []string
	for i := 0; i < len(s); {
		j := i
		for j+1 < len(s) && s[j+1] == s[j]+1 {
			j++
		}
		if j > i {
			parts = append(parts, fmt.Sprintf("%d–%d", s[i], s[j]))
		} else {
			parts = append(parts, strconv.Itoa(s[i]))
		}
		i = j + 1
	}
	return strings.Join(parts, ", ")
}

// formatStudyTime writes a TM (HHMMSS.FFFFFF) as HH:MM; as given when it
// is not one.
func formatStudyTime(tm string) string {
	tm = strings.TrimSpace(tm)
	if len(tm) < 4 {
		return tm
	}
	return tm[0:2] + ":" + tm[2:4]
}
