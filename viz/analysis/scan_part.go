package analysis

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/big"
	"strconv"

	"fovea/modelio"
)

// exactSum adds float64 values without rounding: finite values go into an
// integer counting units of 2⁻¹⁰⁷⁴ (the smallest float64), so the sum does
// not depend on the order or grouping of the additions. That is what lets
// the scans of disjoint shards of the probe images add up to exactly the
// scan of all of them. NaN and ±Inf are added as floats beside it.
type exactSum struct {
	n       big.Int // the finite values' sum × 2¹⁰⁷⁴
	special float64 // the sum of the non-finite values (0 when none)
	tmp     big.Int
}

func (s *exactSum) add(v float64) {
	switch {
	case v == 0:
	case math.IsNaN(v) || math.IsInf(v, 0):
		s.special += v
	default:
		frac, exp := math.Frexp(v) // v = frac·2^exp, 0.5 ≤ |frac| < 1
		m := int64(frac * (1 << 53))
		shift := exp - 53 + 1074
		if shift < 0 { // subnormal: m's low bits are zero
			m >>= -shift
			shift = 0
		}
		s.tmp.SetInt64(m)
		s.tmp.Lsh(&s.tmp, uint(shift))
		s.n.Add(&s.n, &s.tmp)
	}
}

func (s *exactSum) addSum(o *exactSum) {
	s.n.Add(&s.n, &o.n)
	if o.special != 0 || math.IsNaN(o.special) {
		s.special += o.special
	}
}

// float64 is the sum rounded once to the nearest float64.
func (s *exactSum) float64() float64 {
	if s.special != 0 || math.IsNaN(s.special) {
		return s.special
	}
	f := new(big.Float).SetInt(&s.n)
	f.SetMantExp(f, -1074)
	v, _ := f.Float64()
	return v
}

func (s exactSum) MarshalJSON() ([]byte, error) {
	return json.Marshal([2]string{s.n.String(), strconv.FormatFloat(s.special, 'g', -1, 64)})
}

func (s *exactSum) UnmarshalJSON(b []byte) error {
	var v [2]string
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	if _, ok := s.n.SetString(v[0], 10); !ok {
		return fmt.Errorf("sum %q is not an integer", v[0])
	}
	f, err := strconv.ParseFloat(v[1], 64)
	s.special = f
	return err
}

// jfloat is a float64 that survives JSON also when NaN or infinite (as a
// string then).
type jfloat float64

func (f jfloat) MarshalJSON() ([]byte, error) {
	v := float64(f)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return json.Marshal(strconv.FormatFloat(v, 'g', -1, 64))
	}
	return json.Marshal(v)
}

func (f *jfloat) UnmarshalJSON(b []byte) error {
	var s string
	if json.Unmarshal(b, &s) == nil {
		v, err := strconv.ParseFloat(s, 64)
		*f = jfloat(v)
		return err
	}
	var v float64
	err := json.Unmarshal(b, &v)
	*f = jfloat(v)
	return err
}

// ScanPart is what a scan counted before it drew conclusions: per channel
// the images it fired on, its largest value, the exact sum of its values,
// its first value and whether any other differed. Parts of disjoint shards
// of the probe images merge exactly (MergeScan) into the part of a scan of
// all of them; Report turns a part into the ScanReport.
type ScanPart struct {
	Images  int         `json:"images"`
	Skipped []string    `json:"skipped"`
	Rare    float64     `json:"rare"`
	Layers  []PartLayer `json:"layers"`
}

// PartLayer is one scanned layer of a ScanPart. Channels is empty when the
// part saw no image.
type PartLayer struct {
	Name        string                 `json:"name"`
	Output      string                 `json:"output"`
	Conv        string                 `json:"conv,omitempty"`
	KernelFlags map[int][]modelio.Flag `json:"kernel_flags,omitempty"`
	Values      int                    `json:"values"` // values seen per channel
	Channels    []PartChannel          `json:"channels"`
}

// PartChannel is one channel's counts.
type PartChannel struct {
	Fires  int      `json:"fires"`
	Max    jfloat   `json:"max"`
	Sum    exactSum `json:"sum"`
	First  jfloat   `json:"first"`
	Varies bool     `json:"varies"`
	// Bias and MaxPre are ChannelScan.Bias and MaxPreActivation of the
	// part; parts merge them by taking the larger MaxPre (exact: see
	// mergePre) and the one Bias.
	Bias   *jfloat `json:"bias,omitempty"`
	MaxPre *jfloat `json:"max_preactivation,omitempty"`
}

// Part returns the counts the report was made from (nil for a report not
// made by Scan or MergeScan).
func (r *ScanReport) Part() *ScanPart { return r.part }

// EmptyScanPart is the part of a shard without probe files: the layers a
// scan of m looks at, with no counts.
func EmptyScanPart(m *modelio.Model, rare float64) *ScanPart {
	if rare == 0 {
		rare = DefaultRare
	}
	p := &ScanPart{Rare: rare, Skipped: []string{}}
	for _, l := range m.ReluLayers() {
		p.Layers = append(p.Layers, PartLayer{Name: l.Name, Output: l.Output, Channels: []PartChannel{}})
	}
	return p
}

// scanPart collects the accumulators of a finished scan.
func scanPart(m *modelio.Model, accs []*layerAcc, kernels map[int]convFlags, images int, skipped []string, rare float64) *ScanPart {
	p := &ScanPart{Images: images, Skipped: skipped, Rare: rare}
	if p.Skipped == nil {
		p.Skipped = []string{}
	}
	for _, a := range accs {
		l := PartLayer{Name: a.layer.Name, Output: a.layer.Output, Values: a.values, Channels: []PartChannel{}}
		if kf, ok := kernels[a.conv]; ok && kf.m == len(a.channels) {
			l.Conv = m.Layers[a.conv].Name
			l.KernelFlags = kf.flags
		}
		for _, ch := range a.channels {
			pc := PartChannel{Fires: ch.fires, Max: jfloat(ch.max), First: jfloat(ch.first), Varies: ch.varies}
			pc.Bias, pc.MaxPre = a.why(len(l.Channels), kernels)
			pc.Sum.addSum(&ch.sum)
			l.Channels = append(l.Channels, pc)
		}
		p.Layers = append(p.Layers, l)
	}
	return p
}

// Report draws the conclusions: firing fractions, means, and the flags
// (see ChannelScan).
func (p *ScanPart) Report() (*ScanReport, error) {
	if p.Images == 0 {
		return nil, errors.New("viz: scan: no probe image could be read")
	}
	rep := &ScanReport{Images: p.Images, Skipped: p.Skipped, Rare: p.Rare, part: p}
	if len(rep.Skipped) == 0 {
		rep.Skipped = nil
	}
	for _, pl := range p.Layers {
		l := ScanLayer{Name: pl.Name, Output: pl.Output, Conv: pl.Conv}
		for i, ch := range pl.Channels {
			cs := ChannelScan{Index: i, Fires: float64(ch.Fires) / float64(p.Images), Max: float64(ch.Max),
				Mean: ch.Sum.float64() / float64(pl.Values), Flags: []modelio.Flag{}}
			switch {
			case ch.Fires == 0:
				cs.Flags = append(cs.Flags, modelio.FlagDead)
			case cs.Fires < p.Rare:
				cs.Flags = append(cs.Flags, modelio.FlagRare)
			}
			if ch.Fires > 0 && !ch.Varies {
				cs.Flags = append(cs.Flags, modelio.FlagConstant)
			}
			if !finite(cs.Max) || !finite(cs.Mean) {
				// Firing and constancy mean little for such a channel.
				cs.Max, cs.Mean = 0, 0
				cs.Flags = append(cs.Flags[:0], FlagNotFinite)
			}
			cs.Flags = append(cs.Flags, pl.KernelFlags[i]...)
			if ch.Bias != nil {
				v := float64(*ch.Bias)
				cs.Bias = &v
			}
			if ch.MaxPre != nil && finite(float64(*ch.MaxPre)) {
				v := float64(*ch.MaxPre)
				cs.MaxPreActivation = &v
			}
			l.Channels = append(l.Channels, cs)
		}
		rep.Layers = append(rep.Layers, l)
	}
	return rep, nil
}

// MergeScan adds up the parts of disjoint shards, in shard order (skipped
// files are listed in that order), into the part one scan of all the files
// would have counted.
func MergeScan(parts []*ScanPart) (*ScanPart, error) {
	if len(parts) == 0 {
		return nil, errors.New("viz: merge: no parts")
	}
	out := &ScanPart{Rare: parts[0].Rare, Skipped: []string{}}
	for _, l := range parts[0].Layers {
		out.Layers = append(out.Layers, PartLayer{Name: l.Name, Output: l.Output, Channels: []PartChannel{}})
	}
	for _, p := range parts {
		if p.Rare != out.Rare || len(p.Layers) != len(out.Layers) {
			return nil, fmt.Errorf("viz: merge: scan parts of different runs (rare %g and %g, %d and %d layers)", out.Rare, p.Rare, len(out.Layers), len(p.Layers))
		}
		out.Images += p.Images
		out.Skipped = append(out.Skipped, p.Skipped...)
		for i := range p.Layers {
			src, dst := &p.Layers[i], &out.Layers[i]
			if src.Name != dst.Name || src.Output != dst.Output {
				return nil, fmt.Errorf("viz: merge: scan parts of different models (layer %q and %q)", dst.Name, src.Name)
			}
			if dst.Conv == "" && src.Conv != "" {
				dst.Conv, dst.KernelFlags = src.Conv, src.KernelFlags
			}
			if len(src.Channels) == 0 {
				continue
			}
			if len(dst.Channels) == 0 {
				for _, ch := range src.Channels {
					c := PartChannel{Fires: ch.Fires, Max: ch.Max, First: ch.First, Varies: ch.Varies, Bias: ch.Bias, MaxPre: ch.MaxPre}
					c.Sum.addSum(&ch.Sum)
					dst.Channels = append(dst.Channels, c)
				}
				dst.Values = src.Values
				continue
			}
			if len(src.Channels) != len(dst.Channels) {
				return nil, fmt.Errorf("viz: merge: layer %q has %d channels in one part and %d in another", src.Name, len(dst.Channels), len(src.Channels))
			}
			dst.Values += src.Values
			for c := range src.Channels {
				a, b := &dst.Channels[c], &src.Channels[c]
				a.Fires += b.Fires
				am, bm := float64(a.Max), float64(b.Max)
				if math.IsNaN(bm) || bm > am {
					if !math.IsNaN(am) {
						a.Max = b.Max
					}
				}
				a.Sum.addSum(&b.Sum)
				a.MaxPre = mergePre(a.MaxPre, b.MaxPre)
				if a.Bias == nil {
					a.Bias = b.Bias
				}
				// Constant over both only if each was and they share the value
				// (NaN never equals itself, as in the scan's own comparison).
				a.Varies = a.Varies || b.Varies || float32(a.First) != float32(b.First)
			}
		}
	}
	return out, nil
}

// mergePre merges two parts' MaxPre. A part reports the input's maximum of
// a channel that never fired in it (≤ 0), its peak (> 0) when it fired after
// an activation that passes positive values unchanged, and nothing when it
// fired after another one. The larger of two values is the merged one (a
// peak above 0 beats every never-fired maximum); a part without a value
// fired where the value is unknown, so the merge has none either.
func mergePre(a, b *jfloat) *jfloat {
	if a == nil || b == nil {
		return nil
	}
	if float64(*b) > float64(*a) {
		return b
	}
	return a
}
