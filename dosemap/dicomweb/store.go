package dicomweb

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"mime/multipart"
	"net/http"
	"net/textproto"
)

// Store sends DICOM Part 10 files to the archive in one STOW-RS request
// (PS3.18 §10.5), as a multipart/related body of type application/dicom.
// study, when not empty, is the StudyInstanceUID every object must belong
// to (the request goes to /studies/{study}). Every instance must be
// accepted: a FailedSOPSequence (0008,1198) in the answer, or a status
// other than 200, is an error naming the refused instances.
func (c *Client) Store(ctx context.Context, study string, files [][]byte) error {
	if len(files) == 0 {
		return nil
	}
	if study != "" && !validUID(study) {
		return fmt.Errorf("%q is not a DICOM UID", study)
	}
	var body bytes.Buffer
	mw := multipart.NewWriter(&body)
	for n, f := range files {
		if _, err := SOPInstanceUID(f); err != nil {
			return fmt.Errorf("object %d to store: %w", n+1, err)
		}
		h := textproto.MIMEHeader{}
		h.Set("Content-Type", "application/dicom")
		w, err := mw.CreatePart(h)
		if err != nil {
			return err
		}
		if _, err := w.Write(f); err != nil {
			return err
		}
	}
	if err := mw.Close(); err != nil {
		return err
	}
	path := "/studies"
	if study != "" {
		path += "/" + study
	}
	ctype := `multipart/related; type="application/dicom"; boundary=` + mw.Boundary()
	resp, err := c.do(ctx, http.MethodPost, path, nil, "application/dicom+json", ctype, &body)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(io.LimitReader(resp.Body, 16<<20))
	var ans dicomJSON
	if len(bytes.TrimSpace(b)) > 0 {
		if err := json.Unmarshal(b, &ans); err != nil {
			return c.fail(resp.StatusCode, "answer to the store request is not DICOM JSON", err)
		}
	}
	if failed, ok := ans["00081198"]; ok && len(failed.Value) > 0 {
		var refused []string
		for _, raw := range failed.Value {
			var item dicomJSON
			if json.Unmarshal(raw, &item) == nil {
				refused = append(refused, fmt.Sprintf("%s (reason %s)", item.first("00081155"), item.first("00081197")))
			}
		}
		return c.fail(resp.StatusCode, fmt.Sprintf("refused %d of %d objects: %v", len(failed.Value), len(files), refused), nil)
	}
	if resp.StatusCode != http.StatusOK {
		return c.fail(resp.StatusCode, fmt.Sprintf("stored the objects with warnings (%s)", resp.Status), nil)
	}
	return nil
}
