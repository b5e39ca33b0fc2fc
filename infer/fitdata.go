package infer

import (
	"fmt"
	"math"
	"strings"

	"edgewise/likelihood"
	"edgewise/models"
)

// alignLabels returns d with its label indices renumbered to the
// network's label order; a data label that the model lacks is an error
// naming it.
func alignLabels(d *likelihood.Data, net *models.Network) (*likelihood.Data, error) {
	idx := map[string]int{}
	for i, l := range net.Labels {
		idx[l.Name] = i
	}
	perm := make([]uint8, len(d.Labels))
	same := len(d.Labels) == len(net.Labels)
	for i, name := range d.Labels {
		j, ok := idx[name]
		if !ok {
			var have []string
			for _, l := range net.Labels {
				have = append(have, fmt.Sprintf("%q", l.Name))
			}
			return nil, fmt.Errorf("the records carry label %q, which the model does not have (its labels: %s)", name, strings.Join(have, ", "))
		}
		perm[i] = uint8(j)
		if j != i {
			same = false
		}
	}
	if same {
		return d, nil
	}
	out := &likelihood.Data{Labels: make([]string, len(net.Labels))}
	for i, l := range net.Labels {
		out.Labels[i] = l.Name
	}
	out.Records = make([]likelihood.Record, len(d.Records))
	for r, rec := range d.Records {
		lab := make([]uint8, len(rec.Label))
		for k, l := range rec.Label {
			lab[k] = perm[l]
		}
		out.Records[r] = likelihood.Record{ID: rec.ID, Time: rec.Time, Label: lab, End: rec.End}
	}
	return out, nil
}

// exploreBlock is the length, in events, of the blocks the exploration
// subsample is made of.
const exploreBlock = 2000

// exploreSubsample returns about gaps gaps of d: blocks of exploreBlock
// consecutive events taken at an even stride over the records, each a
// record of its own (conditioned on its first event), so that slow drifts
// along the records are sampled evenly.
func exploreSubsample(d *likelihood.Data, gaps int) *likelihood.Data {
	total := d.Events()
	nblocks := total / exploreBlock
	want := gaps/(exploreBlock-1) + 1
	stride := 1
	if nblocks > want {
		stride = nblocks / want
	}
	out := &likelihood.Data{Labels: d.Labels}
	b := 0
	for _, rec := range d.Records {
		n := rec.Len()
		for lo := 0; lo < n; lo += exploreBlock {
			hi := min(lo+exploreBlock, n)
			if b%stride == 0 && hi-lo >= 2 {
				end := math.NaN()
				if hi == n {
					end = rec.End
				}
				out.Records = append(out.Records, likelihood.Record{ID: rec.ID, Time: rec.Time[lo:hi], Label: rec.Label[lo:hi], End: end})
			}
			b++
		}
	}
	if len(out.Records) == 0 {
		return d
	}
	return out
}

// exploreOptions: the exploration blocks are conditioned on their first
// event (a block does not start at the clock origin).
func exploreOptions(o likelihood.Options) likelihood.Options {
	o.Start = likelihood.StartFirstEvent
	return o
}
