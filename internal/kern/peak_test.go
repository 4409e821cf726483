package kern

import (
	"testing"
	"time"
)

// TestPeak: where the processor has a register-only FMA loop, Peak measures
// a positive rate and names it; where it has none (the noasm build),
// Peak says so with 0 and no name rather than a made-up figure.
func TestPeak(t *testing.T) {
	loop, _, isa := peakLoop()
	got, gotISA := Peak(1, 20*time.Millisecond)
	if loop == nil {
		if got != 0 || gotISA != "" {
			t.Errorf("no loop, yet Peak = %v, %q", got, gotISA)
		}
		return
	}
	if !(got > 0) || gotISA != isa {
		t.Errorf("Peak = %v GFLOP/s, %q; want a positive rate of %q", got, gotISA, isa)
	}
	if z, _ := Peak(0, time.Millisecond); z != 0 {
		t.Errorf("Peak on 0 goroutines = %v, want 0", z)
	}
}
