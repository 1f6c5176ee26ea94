package report_test

import (
	"strconv"
	"sync"
	"testing"
	"time"

	"dwiaudit/audit/report"
	"dwiaudit/rules"
	"dwiaudit/store"
)

// Size of BenchmarkDailyList's store: 100,000 series audited over 50
// days, 2,000 a day; on the day asked for, 1,000 studies of two series
// with one finding each (2,000 findings), whose studies are indexed
// through store.Put like received ones.
const (
	benchSeries     = 100_000
	benchDays       = 50
	benchDayStudies = 1_000
	benchBatch      = 10_000 // audits per bbolt transaction while loading
)

// BenchmarkDailyList: the target is under 100 ms per list for a day of
// 2,000 findings in a store of 100,000 series (a real bbolt file).
func BenchmarkDailyList(b *testing.B) {
	loc := quellvander(b)
	s, _ := newStore(b, loc, nil)
	first := time.Date(2026, 10, 1, 0, 0, 0, 0, loc)
	benchDay := first.AddDate(0, 0, benchDays/2)

	// Index the bench day's studies as a C-STORE would, eight at a time.
	var wg sync.WaitGroup
	work := make(chan int)
	for range 8 {
		wg.Go(func() {
			for i := range work {
				put(b, s, newStudy(i), 1)
			}
		})
	}
	for i := range benchDayStudies {
		work <- i
	}
	close(work)
	wg.Wait()

	perDay := benchSeries / benchDays
	batch := make([]store.AuditRecord, 0, benchBatch)
	n := 0
	for d := range benchDays {
		day := first.AddDate(0, 0, d)
		for k := range perDay {
			at := day.Add(time.Duration(k) * 40 * time.Second)
			var rec store.AuditRecord
			if day.Equal(benchDay) {
				st := newStudy(k / 2)
				rec = audit(b, st, k%2+1, at, "brain", "hv-mr1", false,
					finding("b0-only-hotspot", rules.SeverityWarning, seriesUID(st.UID, k%2+1), 2, 0.00121, 0.00079))
			} else {
				st := study{UID: "2.25.9" + strconv.Itoa(n), Accession: "X"}
				rec = audit(b, st, 1, at, "brain", "hv-mr1", false)
			}
			n++
			batch = append(batch, rec)
			if len(batch) == benchBatch {
				saveAudits(b, s, batch...)
				batch = batch[:0]
			}
		}
	}
	saveAudits(b, s, batch...)

	bl := &report.Builder{Source: s, Location: loc}
	day := benchDay.Format("2006-01-02")
	b.ReportAllocs()
	for b.Loop() {
		l, err := bl.Daily(day)
		if err != nil {
			b.Fatal(err)
		}
		if len(l.Rows) != 2*benchDayStudies {
			b.Fatalf("%d rows, want %d", len(l.Rows), 2*benchDayStudies)
		}
	}
}
