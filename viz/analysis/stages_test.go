package analysis

import (
	"testing"
	"time"
)

// TestStagesString: shares of the wall time, worked out by hand (3 s of
// decoding summed over 4 workers in a 2 s scan is 150 %).
func TestStagesString(t *testing.T) {
	s := Stages{Wall: 2 * time.Second, Decode: 3 * time.Second, Prepare: 200 * time.Millisecond,
		Run: 1600 * time.Millisecond, Summarise: 100 * time.Millisecond, Wait: 40 * time.Millisecond, Workers: 4}
	want := "2.00 s: decoding 150 % (4 workers), preparing 10 %, running 80 %, summarising 5 %; waiting for images 2 %"
	if got := s.String(); got != want {
		t.Errorf("got  %q\nwant %q", got, want)
	}
	s.Workers = 1
	if got := s.String(); got != "2.00 s: decoding 150 % (1 worker), preparing 10 %, running 80 %, summarising 5 %; waiting for images 2 %" {
		t.Errorf("one worker: %q", got)
	}
	if got := (Stages{}).String(); got != "no time measured" {
		t.Errorf("zero: %q", got)
	}
}
