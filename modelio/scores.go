package modelio

import "strings"

// ScoreOutput returns the index in m.Outputs of the output that holds the
// class scores, and why it was chosen, for a model with several outputs (a
// network exported with its pooled features beside its logits, say). The
// rules, in order:
//
//  1. only outputs shaped like one vector per image can be scores: after the
//     batch at most one dimension is larger than 1 or unknown ([N,1000],
//     [N,10,1,1]); a feature map [N,C,H,W] is not;
//  2. an output that another candidate is computed from is the features the
//     classifier reads, not its scores;
//  3. a name that says scores ("logits", "prob", "score", "class", "pred",
//     "softmax") wins over a plain one, and a plain one over a name that says
//     features ("feat", "embed", "pool", "hidden");
//  4. otherwise the first candidate, and with no candidate the first output.
//
// It returns (0, "") for a model with one output or none. The choice can be
// overridden by name (infer.Options.Output, the command line's --output).
func (m *Model) ScoreOutput() (int, string) {
	if len(m.Outputs) <= 1 {
		return 0, ""
	}
	var cand []int
	for i, o := range m.Outputs {
		if vectorLike(o.Shape) {
			cand = append(cand, i)
		}
	}
	if len(cand) == 0 {
		return 0, "no output is shaped like one vector of scores per image: the first output is read"
	}
	if len(cand) == 1 {
		return cand[0], "the only output shaped like one vector of scores per image"
	}
	// Rule 2: drop candidates that feed another candidate.
	fed := false
	if m.g != nil {
		var keep []int
		for _, i := range cand {
			feeds := false
			for _, j := range cand {
				if i != j && m.g.dependsOn(m.Outputs[j].Name, m.Outputs[i].Name) {
					feeds = true
				}
			}
			if !feeds {
				keep = append(keep, i)
			} else {
				fed = true
			}
		}
		if len(keep) > 0 {
			cand = keep
		}
	}
	best, bestRank := cand[0], nameRank(m.Outputs[cand[0]].Name)
	for _, i := range cand[1:] {
		if r := nameRank(m.Outputs[i].Name); r > bestRank {
			best, bestRank = i, r
		}
	}
	switch {
	case len(cand) == 1 && fed:
		return best, "the other vector outputs are computed into it (they are its features)"
	case bestRank > 0:
		return best, "its name says it holds scores"
	}
	return best, "the first output shaped like one vector of scores per image"
}

// vectorLike reports whether a per-image shape (after the batch) has at most
// one dimension that is larger than 1 or unknown.
func vectorLike(s Shape) bool {
	if len(s) > 1 {
		s = s[1:]
	}
	big := 0
	for _, d := range s {
		if d.Size > 1 || d.Size < 0 {
			big++
		}
	}
	return big <= 1
}

// nameRank is +1 for an output name that says scores, -1 for one that says
// features, 0 otherwise.
func nameRank(name string) int {
	n := strings.ToLower(name)
	for _, w := range []string{"logit", "prob", "score", "class", "pred", "softmax"} {
		if strings.Contains(n, w) {
			return 1
		}
	}
	for _, w := range []string{"feat", "embed", "pool", "hidden"} {
		if strings.Contains(n, w) {
			return -1
		}
	}
	return 0
}

// dependsOn reports whether tensor a is computed (directly or not) from
// tensor b.
func (g *graph) dependsOn(a, b string) bool {
	seen := map[string]bool{a: true}
	stack := []string{a}
	for len(stack) > 0 {
		t := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		if t == b && t != a {
			return true
		}
		p, ok := g.producer[t]
		if !ok {
			continue
		}
		for _, in := range g.nodes[p].GetInput() {
			if in == b {
				return true
			}
			if in != "" && !seen[in] {
				seen[in] = true
				stack = append(stack, in)
			}
		}
	}
	return false
}
