package passes

import (
	"strings"

	"github.com/lanthorn/lanthorn/ir"
)

// mergeLinear replaces every run of consecutive linear layers (dense or
// linear, with no activation between them) by their product, one linear
// layer: it costs one level and one rescale where the run cost one each.
func mergeLinear(s *State) error {
	g := s.Graph
	var out []*ir.Layer
	for _, l := range g.Layers {
		if n := len(out); n > 0 && mergeable(out[n-1]) && mergeable(l) {
			s.Report.Mergeable = append(s.Report.Mergeable, l.Name)
			if s.Opts.KeepApart[l.Name] {
				s.note("%s: kept apart from the linear layer before it (the selection found that cheaper)", l.Name)
				out = append(out, l)
				continue
			}
			m := compose(out[n-1], l)
			s.note("%s: merged into one linear map %d→%d (%d nonzeros): %s", m.Name, m.In, m.Out, m.Map.NNZ(), strings.Join(m.From, " · "))
			out[n-1] = m
			continue
		}
		out = append(out, l)
	}
	g.Layers = out
	return nil
}

func mergeable(l *ir.Layer) bool { return l.Kind == ir.Dense || l.Kind == ir.Linear }
