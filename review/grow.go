package review

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"dosecover/dosemap"
)

// growState is what AddSonication needs of the sonications a Session
// holds: the sonications themselves (their start and frame times set the
// session clock), the cooling tails of the residual heat estimate, and
// the patient box the estimate covers.
type growState struct {
	sons      []*dosemap.Sonication
	tails     []*dosemap.CoolingTail
	ext       []vec3
	clockNote string
	common    bool // the thermometry grid is a common grid built for sonications on different planes
}

// AddSonication computes the thermometry and dose of so, a sonication
// delivered after those the session holds, and adds it to the session:
// the next Analyze includes it. The sonications prepared already are not
// read again; only the new sonication's residual heat estimate (from the
// cooling tails kept of the earlier ones), the cumulative dose and the
// analysis are redone, giving the figures Prepare gives for the whole case.
// so is resampled onto the session's thermometry grid when acquired on
// another grid (with a warning, as Prepare does). Its Number must be new.
func (s *Session) AddSonication(ctx context.Context, so *dosemap.Sonication) error {
	if so == nil {
		return errors.New("no sonication to add")
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	for _, sd := range s.sons {
		if sd.number == so.Number {
			return fmt.Errorf("sonication number %d is in the session already", so.Number)
		}
	}
	name := fmt.Sprintf("sonication %d (%s)", so.Number, so.Label)
	named := func(err error) error {
		if strings.HasPrefix(err.Error(), name) {
			return err
		}
		return fmt.Errorf("%s: %w", name, err)
	}
	ref := s.fg.coarse
	all := append(slices.Clone(s.grown.sons), so)
	clocks, clockNote := sessionClock(all)
	sd, unit, err := prepareStacks(ctx, so, s.prepared, ref, s.keep, clocks[len(all)-1], nil)
	if err != nil {
		return named(err)
	}
	if unit != s.unit {
		return fmt.Errorf("sonication %d: dose in %s, the session's in %s", so.Number, unit, s.unit)
	}
	// Residual heat: the estimate of a sonication depends on the earlier
	// ones only, so theirs stand and the new one's comes from the tails
	// kept. A session clock broken by the new sonication (no time, or an
	// overlap) leaves its estimate unknown, with the note Prepare gives.
	tail := sd.tail
	sd.tail, sd.cooling = nil, math.NaN()
	tails := append(slices.Clone(s.grown.tails), nil)
	if clockNote == "" && tail != nil {
		var masks []*dosemap.CoolingTail // grids met before
		for _, t := range s.grown.tails {
			if t != nil {
				masks = append(masks, t)
				masks = append(masks, t.Stacks...)
			}
		}
		maskTails(tail, &masks, s.grown.ext)
		tails[len(tails)-1] = tail
		est, err := dosemap.EstimateResidual(tails, dosemap.DefaultResidualOptions())
		if err != nil {
			return named(err)
		}
		e := est[len(est)-1]
		sd.cooling = e.CoolingS
		if e.Rise != nil {
			sd.residual = residualOnGrid(e, ref)
			if s.prepared.CarryOver && hiddenHeat(e) {
				redo, err := withResidual(ctx, so, s.prepared, ref, s.keep, e)
				if err != nil {
					return fmt.Errorf("sonication %d with residual heat: %w", so.Number, err)
				}
				sd.takeCorrected(redo, ref)
			}
		}
	}
	for _, nt := range sd.notes {
		s.warnings = append(s.warnings, fmt.Sprintf("sonication %d: %s", so.Number, nt))
	}
	if !s.grown.common && !so.Geometry.SameGrid(ref, 0.01) && len(s.sons) > 0 {
		s.warnings = append(s.warnings, fmt.Sprintf("sonication %d was acquired on a different grid and was resampled onto the grid of sonication %d", so.Number, s.sons[0].number))
	}
	if clockNote != "" && s.grown.clockNote == "" {
		s.warnings = append(s.warnings, clockNote)
		s.grown.clockNote = clockNote
	}
	s.sons = append(s.sons, sd)
	s.grown.sons, s.grown.tails = all, tails
	s.cache, s.mcCache = nil, nil // both depend on the set of sonications
	return nil
}
