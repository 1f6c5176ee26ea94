package seglog

import (
	"fmt"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// BenchmarkAppend appends 130 KB records (one 256 x 256 MR image with its
// header, the size the ingest comparison uses) from 1, 4 and 8 concurrent
// writers into a log in a real temporary folder, each Append durable.
// It reports records/s and fdatasyncs per record (group commit shares one
// flush among the writers waiting at the time).
//
//	go test -run '^$' -bench Append -benchtime 2000x ./store/seglog/
func BenchmarkAppend(b *testing.B) {
	const recordBytes = 130 << 10
	payload := payloadFor(1, recordBytes)
	for _, writers := range []int{1, 4, 8} {
		b.Run(fmt.Sprintf("writers=%d", writers), func(b *testing.B) {
			l, err := Open(b.TempDir(), Options{})
			if err != nil {
				b.Fatal(err)
			}
			defer l.Close()
			var next atomic.Int64
			var wg sync.WaitGroup
			b.SetBytes(recordBytes)
			b.ResetTimer()
			start := time.Now()
			for w := range writers {
				wg.Add(1)
				go func() {
					defer wg.Done()
					for {
						i := next.Add(1)
						if i > int64(b.N) {
							return
						}
						if _, err := l.Append(uidFor(w*1_000_000+int(i)), payload); err != nil {
							b.Error(err)
							return
						}
					}
				}()
			}
			wg.Wait()
			elapsed := time.Since(start)
			b.StopTimer()
			st := l.Stats()
			b.ReportMetric(float64(st.Appends)/elapsed.Seconds(), "records/s")
			b.ReportMetric(float64(st.Flushes)/float64(st.Appends), "fdatasyncs/record")
		})
	}
}
