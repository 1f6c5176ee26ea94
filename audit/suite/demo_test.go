package suite

import (
	"testing"
	"time"
)

func TestTheDemoClockKeepsTheScenarioOnItsDaysNearMidnight(t *testing.T) {
	loc := time.FixedZone("QOH", 3600)
	late := time.Date(2026, 12, 2, 23, 59, 50, 0, loc)
	var c demoClock
	c.begin(late, loc)
	c.daysBack.Store(3)
	got := c.Now().In(loc)
	if y, m, d := got.Date(); y != 2026 || m != 11 || d != 29 || got.Hour() != demoLatestHour {
		t.Errorf("three days back from 23:59:50 on 2026-12-02 = %v, want 2026-11-29 from %d:00", got, demoLatestHour)
	}
	c.daysBack.Store(0)
	if y, m, d := c.Now().In(loc).Date(); y != 2026 || m != 12 || d != 2 {
		t.Errorf("the last day = %v, want the demo's start day 2026-12-02", c.Now().In(loc))
	}
	c.live.Store(true)
	if d := time.Since(c.Now()); d < -time.Second || d > time.Second {
		t.Errorf("live clock %v is not the real time", c.Now())
	}
}
