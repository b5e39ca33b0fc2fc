package infer

import (
	"fmt"

	"edgewise/likelihood"
	"edgewise/models"
)

// ImpossibleError says that the records contain a label pair that a
// scheme cannot produce at any parameter values: the model's P(l'|l) is
// zero by its structure (for example a chain, whose labels strictly
// alternate, against records with two + in a row), so its ln L is -inf
// everywhere and no fit exists. Record and Event locate the first such
// pair (1-based event number of the second label within the record).
type ImpossibleError struct {
	Model    string
	Record   string
	Event    int
	From, To string
	Count    int // how many such pairs the records hold
}

func (e *ImpossibleError) Error() string {
	rec := ""
	if e.Record != "" {
		rec = fmt.Sprintf("record %q ", e.Record)
	}
	return fmt.Sprintf("the records are impossible under %s: they hold %d %q followed by %q (first at %sevent %d), which this scheme cannot produce at any rates", e.Model, e.Count, e.From, e.To, rec, e.Event)
}

// structurallyImpossible returns an *ImpossibleError when d (labels
// aligned with net) holds a consecutive label pair whose probability under
// net is zero. Which pairs are possible depends only on the graph and the
// labels (every rate is positive), so the start values stand for all.
func structurallyImpossible(name string, net *models.Network, d *likelihood.Data, in likelihood.Instrument) error {
	k, err := likelihood.NewKernels(net)
	if err != nil {
		return nil
	}
	p, err := likelihood.NewPredictor(k, in)
	if err != nil {
		return nil
	}
	tr := p.Transition()
	var first *ImpossibleError
	for r := range d.Records {
		rec := &d.Records[r]
		for i := 1; i < rec.Len(); i++ {
			a, b := rec.Label[i-1], rec.Label[i]
			if int(a) >= len(tr) || int(b) >= len(tr) || tr[a][b] > 0 {
				continue
			}
			if first == nil {
				first = &ImpossibleError{Model: name, Record: rec.ID, Event: i + 1, From: d.Labels[a], To: d.Labels[b]}
			}
			if d.Labels[a] == first.From && d.Labels[b] == first.To {
				first.Count++
			}
		}
	}
	if first == nil {
		return nil
	}
	return first
}
