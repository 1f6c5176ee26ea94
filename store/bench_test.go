package store

import (
	"bytes"
	"context"
	"fmt"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// BenchmarkPut stores 128 KiB data sets (about one 256x256 16-bit MR
// image) from 1, 4 and 8 concurrent writers into a temporary folder on the
// test machine's disk, with real fsyncs. Each writer sends its own series.
// It reports MB/s (SetBytes), Puts per second, and bbolt commits and
// folder fsyncs per Put: group commit shows as commits/put below 1.
func BenchmarkPut(b *testing.B) {
	const size = 128 << 10
	for _, writers := range []int{1, 4, 8} {
		b.Run(fmt.Sprintf("writers=%d", writers), func(b *testing.B) {
			s, _ := newTestStore(b, func(o *Options) { o.Now = time.Now })
			data := make([][]byte, writers)
			for w := range writers {
				data[w] = testInstance{SOP: "2.25.1", Series: uid(1, w), Payload: size - 400}.dataSet()
			}
			b.SetBytes(int64(len(data[0])))
			var next atomic.Int64
			b.ResetTimer()
			start := time.Now()
			var wg sync.WaitGroup
			for w := range writers {
				wg.Go(func() {
					for {
						i := next.Add(1)
						if i > int64(b.N) {
							return
						}
						ti := testInstance{SOP: uid(2, w, int(i)), Series: uid(1, w)}
						if _, err := s.Put(context.Background(), ti.request(), bytes.NewReader(data[w])); err != nil {
							b.Error(err)
							return
						}
					}
				})
			}
			wg.Wait()
			elapsed := time.Since(start)
			b.StopTimer()
			st := s.Stats()
			b.ReportMetric(float64(b.N)/elapsed.Seconds(), "puts/s")
			b.ReportMetric(float64(st.Commits)/float64(st.Puts), "commits/put")
			b.ReportMetric(float64(st.DirSyncs)/float64(st.Puts), "dirsyncs/put")
		})
	}
}
