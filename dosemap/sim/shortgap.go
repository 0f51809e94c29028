package sim

import "fmt"

// ShortGapPlanesSession is PlanesSession(l, seed) with cooling seconds of
// unimaged cooling before every sonication instead of two minutes: heat
// left from the earlier sonications stays hidden from each series'
// baseline, on every plane (truth.json's true dose counts it).
func ShortGapPlanesSession(l Layout, seed uint64, cooling float64) *Session {
	s := PlanesSession(l, seed)
	s.Label = fmt.Sprintf("%s-gap-%gs", s.Label, cooling)
	s.Description += fmt.Sprintf(" %g s of cooling between sonications (residual heat hidden from the thermometry).", cooling)
	for n := range s.Sonications {
		s.Sonications[n].Cooling = cooling
	}
	return s
}
