package analysis

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"fovea/modelio"
)

// This file compares what two models do: the dead-filter scans of both over
// the same probe images, and their answers on the same labelled images.

// ChannelRef names one channel of a scanned layer. Flags are the scan's
// dead/rare flags of the channel in the model where it is dead or rare.
type ChannelRef struct {
	Layer string         `json:"layer"`
	Index int            `json:"index"`
	Flags []modelio.Flag `json:"flags"`
}

// FiringChange is a channel whose firing rate (the fraction of probe images
// on which it fired) differs between the scans: A and B are the rates.
type FiringChange struct {
	Layer string  `json:"layer"`
	Index int     `json:"index"`
	A     float64 `json:"a"`
	B     float64 `json:"b"`
}

// HealthDiff is the comparison of two scans.
type HealthDiff struct {
	NewlyDead []ChannelRef   `json:"newly_dead"` // dead or rare in B, neither in A
	Revived   []ChannelRef   `json:"revived"`    // dead or rare in A, neither in B
	Firing    []FiringChange `json:"firing"`     // every rate that differs, largest change first
	Unmatched []string       `json:"unmatched"`  // layers scanned in one model only, or with other channel counts
}

func deadOrRare(flags []modelio.Flag) []modelio.Flag {
	var out []modelio.Flag
	for _, f := range flags {
		if f == modelio.FlagDead || f == modelio.FlagRare {
			out = append(out, f)
		}
	}
	return out
}

// CompareHealth compares scans a and b of two models over the same probe
// images (same files, same preprocessing): layers are paired by name and
// channels by index. Scans over different numbers of images are refused: the
// rates and the rare threshold would not mean the same.
func CompareHealth(a, b *ScanReport) (*HealthDiff, error) {
	if a.Images != b.Images || a.Rare != b.Rare {
		return nil, fmt.Errorf("viz: compare: the scans differ (%d images, rare %g against %d images, rare %g): scan both over the same probe images",
			a.Images, a.Rare, b.Images, b.Rare)
	}
	d := &HealthDiff{NewlyDead: []ChannelRef{}, Revived: []ChannelRef{}, Firing: []FiringChange{}, Unmatched: []string{}}
	inB := map[string]*ScanLayer{}
	for i := range b.Layers {
		inB[b.Layers[i].Name] = &b.Layers[i]
	}
	seen := map[string]bool{}
	for _, la := range a.Layers {
		lb, ok := inB[la.Name]
		if !ok {
			d.Unmatched = append(d.Unmatched, fmt.Sprintf("%s: scanned in a only", la.Name))
			continue
		}
		seen[la.Name] = true
		if len(la.Channels) != len(lb.Channels) {
			d.Unmatched = append(d.Unmatched, fmt.Sprintf("%s: %d channels in a, %d in b", la.Name, len(la.Channels), len(lb.Channels)))
			continue
		}
		for i, ca := range la.Channels {
			cb := lb.Channels[i]
			fa, fb := deadOrRare(ca.Flags), deadOrRare(cb.Flags)
			switch {
			case len(fa) == 0 && len(fb) > 0:
				d.NewlyDead = append(d.NewlyDead, ChannelRef{Layer: la.Name, Index: cb.Index, Flags: fb})
			case len(fa) > 0 && len(fb) == 0:
				d.Revived = append(d.Revived, ChannelRef{Layer: la.Name, Index: ca.Index, Flags: fa})
			}
			if ca.Fires != cb.Fires {
				d.Firing = append(d.Firing, FiringChange{Layer: la.Name, Index: ca.Index, A: ca.Fires, B: cb.Fires})
			}
		}
	}
	for _, lb := range b.Layers {
		if !seen[lb.Name] {
			if _, inA := findLayer(a, lb.Name); !inA {
				d.Unmatched = append(d.Unmatched, fmt.Sprintf("%s: scanned in b only", lb.Name))
			}
		}
	}
	slices.SortStableFunc(d.Firing, func(x, y FiringChange) int {
		return cmp.Compare(math.Abs(y.B-y.A), math.Abs(x.B-x.A))
	})
	return d, nil
}

func findLayer(r *ScanReport, name string) (int, bool) {
	for i, l := range r.Layers {
		if l.Name == name {
			return i, true
		}
	}
	return -1, false
}

// Answer is one model's answer on one labelled image.
type Answer struct {
	File      string
	True      int
	Predicted int
}

// Flip is an image one model got right and the other wrong.
type Flip struct {
	File string `json:"file"`
	True int    `json:"true"`
	A    int    `json:"a"` // A's predicted class
	B    int    `json:"b"` // B's predicted class
	// Worse: A was right and B is wrong; otherwise A was wrong and B is right.
	Worse bool `json:"worse"`
}

// PredictionDiff pairs two models' answers on the same images.
type PredictionDiff struct {
	Images   int `json:"images"`
	CorrectA int `json:"correct_a"`
	CorrectB int `json:"correct_b"`
	// Worse counts images right under A and wrong under B, Better the
	// reverse: the two discordant cells of McNemar's table.
	Worse  int    `json:"worse"`
	Better int    `json:"better"`
	Flips  []Flip `json:"flips"` // by file name
	// P is McNemar's exact two-sided p-value for "A and B are equally
	// accurate on such images" (McNemarExact(Worse, Better)).
	P float64 `json:"p"`
}

// ComparePredictions pairs a's and b's answers by file name. Both must hold
// the same files with the same true classes: answers from the same labelled
// data, with the same images skipped.
func ComparePredictions(a, b []Answer) (*PredictionDiff, error) {
	byFile := map[string]Answer{}
	for _, x := range b {
		if _, dup := byFile[x.File]; dup {
			return nil, fmt.Errorf("viz: compare: %s is answered twice by b", x.File)
		}
		byFile[x.File] = x
	}
	if len(a) != len(b) {
		return nil, fmt.Errorf("viz: compare: a answered %d images, b %d: compare on the same images", len(a), len(b))
	}
	d := &PredictionDiff{Images: len(a), Flips: []Flip{}}
	for _, x := range a {
		y, ok := byFile[x.File]
		if !ok {
			return nil, fmt.Errorf("viz: compare: %s is answered by a but not by b", x.File)
		}
		if x.True != y.True {
			return nil, fmt.Errorf("viz: compare: %s has true class %d for a and %d for b", x.File, x.True, y.True)
		}
		ra, rb := x.Predicted == x.True, y.Predicted == y.True
		if ra {
			d.CorrectA++
		}
		if rb {
			d.CorrectB++
		}
		if ra != rb {
			if ra {
				d.Worse++
			} else {
				d.Better++
			}
			d.Flips = append(d.Flips, Flip{File: x.File, True: x.True, A: x.Predicted, B: y.Predicted, Worse: ra})
		}
	}
	slices.SortFunc(d.Flips, func(x, y Flip) int { return cmp.Compare(x.File, y.File) })
	d.P = McNemarExact(d.Worse, d.Better)
	return d, nil
}

// McNemarExact returns the exact two-sided p-value of McNemar's test for
// paired outcomes (Q. McNemar, "Note on the sampling error of the difference
// between correlated proportions or percentages", Psychometrika 12 (1947)
// 153–157), in its exact binomial form: of the n = b + c pairs where the two
// models disagree, b went one way and c the other; under equal accuracy b
// is Binomial(n, ½), and the p-value is twice the smaller tail,
//
//	p = min(1, 2 · Σ_{i=0}^{min(b,c)} C(n, i) / 2ⁿ),
//
// which equals the two-sided binomial test at ½. With no discordant pair
// there is no evidence either way: p = 1. The sum is taken in log space, so
// counts in the millions neither overflow nor underflow early.
func McNemarExact(b, c int) float64 {
	if b < 0 || c < 0 {
		panic("viz: McNemarExact: negative count")
	}
	n := b + c
	k := min(b, c)
	if n == 0 || 2*k == n {
		return 1
	}
	lgN, _ := math.Lgamma(float64(n) + 1)
	logTerm := func(i int) float64 {
		li, _ := math.Lgamma(float64(i) + 1)
		lr, _ := math.Lgamma(float64(n-i) + 1)
		return lgN - li - lr - float64(n)*math.Ln2
	}
	// log-sum-exp over i = 0..k; the largest term is i = k (k < n/2).
	top := logTerm(k)
	s := 0.0
	for i := 0; i <= k; i++ {
		s += math.Exp(logTerm(i) - top)
	}
	return min(1, 2*math.Exp(top+math.Log(s)))
}
