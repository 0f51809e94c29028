package review

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"dosecover/dosemap"
)

// AddSonication computes the thermometry and dose of so, a sonication
// delivered after those the session holds, and adds it to the session:
// the next Analyze includes it. The sonications prepared already are not
// read again; only the cumulative dose and the analysis are redone. so is
// resampled onto the session's thermometry grid when acquired on another
// grid (with a warning, as Prepare does). Its Number must be new.
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
	ref := s.fg.coarse
	sd, unit, err := prepareSonication(ctx, so, s.prepared, ref, s.keep)
	if err != nil {
		name := fmt.Sprintf("sonication %d (%s)", so.Number, so.Label)
		if strings.HasPrefix(err.Error(), name) {
			return err
		}
		return fmt.Errorf("%s: %w", name, err)
	}
	if unit != s.unit {
		return fmt.Errorf("sonication %d: dose in %s, the session's in %s", so.Number, unit, s.unit)
	}
	for _, nt := range sd.notes {
		s.warnings = append(s.warnings, fmt.Sprintf("sonication %d: %s", so.Number, nt))
	}
	if !so.Geometry.SameGrid(ref, 0.01) && len(s.sons) > 0 {
		s.warnings = append(s.warnings, fmt.Sprintf("sonication %d was acquired on a different grid and was resampled onto the grid of sonication %d", so.Number, s.sons[0].number))
	}
	s.sons = append(s.sons, sd)
	s.cache, s.mcCache = nil, nil // both depend on the set of sonications
	return nil
}
