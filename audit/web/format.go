package web

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"dwiaudit/audit/report"
)

// Caution is the sentence every page shows.
const Caution = "dwiaudit checks acquisitions; it does not diagnose. Clinical decisions rest with the radiologist and local policy."

// formatADC writes an ADC in mm²/s as "0.79 ×10⁻³ mm²/s"; "—" for nil.
func formatADC(v *float64) string {
	if v == nil || math.IsNaN(*v) || math.IsInf(*v, 0) {
		return "—"
	}
	return fmt.Sprintf("%.2f ×10⁻³ mm²/s", *v*1e3)
}

// formatNumber writes a measure without unit, "—" for nil.
func formatNumber(v *float64, digits int) string {
	if v == nil || math.IsNaN(*v) || math.IsInf(*v, 0) {
		return "—"
	}
	return strconv.FormatFloat(*v, 'f', digits, 64)
}

// displayValue rewrites a finding value in the report's words
// (report.Value: "0.79e-3 mm²/s", "0.60e-3 to 1.10e-3 mm²/s") with the
// pages' ADC notation ("0.60 to 1.10 ×10⁻³ mm²/s").
func displayValue(s string) string {
	if !strings.HasSuffix(s, " mm²/s") || !strings.Contains(s, "e-3") {
		return s
	}
	return strings.ReplaceAll(strings.TrimSuffix(s, " mm²/s"), "e-3", "") + " ×10⁻³ mm²/s"
}

// maskPatientID shows a patient ID as the daily list does (masked to
// its last characters, report.PatientIDMasked).
func maskPatientID(id string) string { return report.PatientIDMasked.Apply(strings.TrimSpace(id)) }

// studyDateTime reads a study's DA (YYYYMMDD) and TM (HHMMSS.FFFFFF, or
// a prefix of it; PS3.5 6.2) in loc; ok is false without a valid date.
func studyDateTime(da, tm string, loc *time.Location) (time.Time, bool) {
	d, err := time.ParseInLocation("20060102", strings.TrimSpace(da), loc)
	if err != nil {
		return time.Time{}, false
	}
	tm = strings.TrimSpace(tm)
	if i := strings.IndexByte(tm, '.'); i >= 0 {
		tm = tm[:i]
	}
	var h, m, s int
	if len(tm) >= 2 {
		h, _ = strconv.Atoi(tm[0:2])
	}
	if len(tm) >= 4 {
		m, _ = strconv.Atoi(tm[2:4])
	}
	if len(tm) >= 6 {
		s, _ = strconv.Atoi(tm[4:6])
	}
	if h > 23 || m > 59 || s > 60 {
		h, m, s = 0, 0, 0
	}
	return time.Date(d.Year(), d.Month(), d.Day(), h, m, s, 0, loc), true
}

// formatStudyDate writes a DA as 2025-03-04; as given when it is not one.
func formatStudyDate(da string) string {
	d, err := time.Parse("20060102", strings.TrimSpace(da))
	if err != nil {
		return da
	}
	return d.Format("2006-01-02")
}
