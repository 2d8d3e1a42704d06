package audit

import (
	"reflect"
	"testing"
)

// TestSweepValues checks the report's sweep grids: fractions stay in
// 0..1 in steps around the limit, counts are quarters of the limit up to
// twice it, and the run's own limit is always a point.
func TestSweepValues(t *testing.T) {
	for _, c := range []struct {
		limit    float64
		fraction bool
		want     []float64
	}{
		{0.3, true, []float64{0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.45, 0.5}},
		{0.9, true, []float64{0.8, 0.825, 0.85, 0.875, 0.9, 0.925, 0.95, 0.975, 1}},
		{0.03, true, []float64{0, 0.025, 0.03, 0.05, 0.075, 0.1, 0.125, 0.15, 0.175, 0.2}},
		{50, false, []float64{13, 25, 38, 50, 63, 75, 88, 100}},
		{2, false, []float64{1, 2, 3, 4}},
		{2.5, false, []float64{0.625, 1.25, 1.875, 2.5, 3.125, 3.75, 4.375, 5}},
		{0, false, []float64{0, 1, 2, 3, 4, 5, 6, 7, 8}},
	} {
		if got := sweepValues(c.limit, c.fraction); !reflect.DeepEqual(got, c.want) {
			t.Errorf("sweepValues(%v, %v) = %v, want %v", c.limit, c.fraction, got, c.want)
		}
	}
}
