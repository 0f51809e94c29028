package audit

import (
	"io"

	"dosecover/dosemap"
	"dosecover/review"
	"dosecover/review/report"
)

// ReportArtifacts makes the one-page report of a case (package
// review/report) as report.png and report.pdf, with the case's input hash
// printed on it and identity hidden when the case is de-identified.
func ReportArtifacts(c *Case, cs *dosemap.Case, res *review.Result) ([]Artifact, error) {
	in, err := report.FromResult(cs, res, report.Options{Deidentify: c.Deidentify, InputsSHA256: c.InputSHA256})
	if err != nil {
		return nil, err
	}
	return []Artifact{
		{Name: "report.png", Write: func(w io.Writer) error { return report.RenderPNG(w, in, report.DefaultDPI) }},
		{Name: "report.pdf", Write: func(w io.Writer) error { return report.RenderPDF(w, in) }},
	}, nil
}
