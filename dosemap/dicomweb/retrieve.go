package dicomweb

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"mime"
	"mime/multipart"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"
)

// FileExt is the extension of the retrieved files: DIR/<SOPInstanceUID>.dcm.
const FileExt = ".dcm"

// maxInstanceBytes bounds one multipart part (one instance).
const maxInstanceBytes = 2 << 30

// RetrieveOptions tune Retrieve.
type RetrieveOptions struct {
	// PerInstance asks for every instance by its own request instead of
	// one request per series (slower; kept to compare with).
	PerInstance bool
	// Progress, when set, is called after each instance written with the
	// number of instances present and the total (safe for any goroutine).
	Progress func(done, total int)
}

// RetrieveStats sums up a retrieval.
type RetrieveStats struct {
	Instances int   // in the study
	Present   int   // already in the folder before
	Fetched   int   // written by this retrieval
	Bytes     int64 // bytes written
}

// Retrieve copies study into dir (created if needed): one file per
// instance named by its SOP Instance UID (FileExt), each written
// atomically and the folder flushed to disk once at the end, several
// requests at once (WADO-RS, PS3.18 §10.4). Files
// already in dir are kept and not fetched again. Nothing on the archive
// changes. The list of instances is read before and after the transfer;
// a difference, an instance listed but not delivered or an unexpected
// one, or a body cut short is an error (the files fetched stay in dir,
// and a later call completes them).
func (c *Client) Retrieve(ctx context.Context, study, dir string, o RetrieveOptions) (RetrieveStats, error) {
	var st RetrieveStats
	total, err := c.studyCount(ctx, study)
	if err != nil {
		return st, err
	}
	if total == 0 {
		return st, c.fail(404, fmt.Sprintf("has no instances of study %s", study), nil)
	}
	st.Instances = total
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return st, fmt.Errorf("retrieving study %s: %w", study, err)
	}
	// A folder with no instance yet gets the whole study in one request
	// (the archive answers it far faster than its list of instances);
	// otherwise the list tells what is missing.
	type job struct{ series, sop string }
	var jobs []job
	var listed map[string]bool // nil: whole-study request, list unknown
	missing := map[string]bool{}
	names, err := folderFiles(dir)
	if err != nil {
		return st, err
	}
	if !o.PerInstance && len(names) == 0 {
		jobs = append(jobs, job{})
	} else {
		list, err := c.Instances(ctx, study)
		if err != nil {
			return st, err
		}
		if len(list) != total {
			return st, c.fail(0, fmt.Sprintf("lists %d instances of study %s but counts %d (the study is changing); retrieve it again", len(list), study, total), nil)
		}
		listed = map[string]bool{}
		for _, in := range list {
			listed[in.SOP+FileExt] = true
		}
		for _, n := range names {
			if !listed[n] {
				return st, fmt.Errorf("%s holds %s, which is not an instance of study %s: retrieve into an empty folder (studies are never mixed)", dir, n, study)
			}
		}
		listed = map[string]bool{}
		bySeries := map[string][]string{}
		seriesSize := map[string]int{}
		var order []string
		for _, in := range list {
			listed[in.SOP] = true
			seriesSize[in.Series]++
			if presentFile(filepath.Join(dir, in.SOP+FileExt), in.SOP) {
				st.Present++
				continue
			}
			if _, ok := bySeries[in.Series]; !ok {
				order = append(order, in.Series)
			}
			bySeries[in.Series] = append(bySeries[in.Series], in.SOP)
			missing[in.SOP] = true
		}
		// A whole series in one request when all of it is missing,
		// otherwise the missing instances one by one.
		for _, s := range order {
			if !o.PerInstance && len(bySeries[s]) == seriesSize[s] {
				jobs = append(jobs, job{series: s})
				continue
			}
			for _, sop := range bySeries[s] {
				jobs = append(jobs, job{series: s, sop: sop})
			}
		}
	}
	var (
		mu        sync.Mutex
		firstErr  error
		done      = st.Present
		delivered = map[string]bool{}
	)
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	setErr := func(err error) {
		mu.Lock()
		if firstErr == nil {
			firstErr = err
		}
		mu.Unlock()
		cancel()
	}
	if o.Progress != nil {
		o.Progress(done, st.Instances)
	}
	wrote := func(sop string, n int64) error {
		mu.Lock()
		defer mu.Unlock()
		if listed != nil && !listed[sop] {
			return c.fail(0, fmt.Sprintf("sent instance %s, which is not listed in study %s (the study changed during retrieval)", sop, study), nil)
		}
		if delivered[sop] {
			return nil // sent twice: harmless
		}
		delivered[sop] = true
		delete(missing, sop)
		st.Fetched++
		st.Bytes += n
		done++
		if o.Progress != nil {
			o.Progress(min(done, st.Instances), st.Instances)
		}
		return nil
	}
	ch := make(chan job)
	var wg sync.WaitGroup
	for w := 0; w < min(c.workers, len(jobs)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range ch {
				path := "/studies/" + study
				if j.series != "" {
					path += "/series/" + j.series
				}
				if j.sop != "" {
					path += "/instances/" + j.sop
				}
				if err := c.fetch(ctx, path, dir, wrote); err != nil {
					setErr(err)
				}
			}
		}()
	}
	for _, j := range jobs {
		select {
		case ch <- j:
			continue
		case <-ctx.Done():
		}
		break
	}
	close(ch)
	wg.Wait()
	if st.Fetched > 0 {
		if err := syncFolder(dir); err != nil && firstErr == nil {
			firstErr = fmt.Errorf("flushing %s to disk: %w", dir, err)
		}
	}
	if firstErr != nil {
		return st, firstErr
	}
	if err := ctx.Err(); err != nil {
		return st, c.fail(0, "retrieval cancelled", err)
	}
	if listed == nil && st.Fetched != total {
		return st, c.fail(0, fmt.Sprintf("delivered %d of the %d instances of study %s: the study changed during retrieval or the archive lost some; the folder holds a partial study",
			st.Fetched, total, study), nil)
	}
	if len(missing) > 0 {
		var some []string
		for sop := range missing {
			some = append(some, sop)
			if len(some) == 3 {
				break
			}
		}
		return st, c.fail(0, fmt.Sprintf("did not deliver %d of the %d instances of study %s (e.g. %s): the study changed during retrieval or the archive lost them; the folder holds a partial study",
			len(missing), st.Instances, study, strings.Join(some, ", ")), nil)
	}
	after, err := c.studyCount(ctx, study)
	if err != nil {
		return st, err
	}
	if after != total {
		return st, c.fail(0, fmt.Sprintf("study %s changed during retrieval (%d instances before, %d after); retrieve it again", study, total, after), nil)
	}
	return st, nil
}

// folderFiles returns the names of what dir holds, leaving out (and
// removing) temporary files of an interrupted retrieval.
func folderFiles(dir string) ([]string, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("reading %s: %w", dir, err)
	}
	var names []string
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), ".") && strings.Contains(e.Name(), FileExt+".part-") {
			os.Remove(filepath.Join(dir, e.Name()))
			continue
		}
		names = append(names, e.Name())
	}
	return names, nil
}

// studyCount returns NumberOfStudyRelatedInstances (0020,1208) of study
// (QIDO-RS), 0 when the archive does not know it.
func (c *Client) studyCount(ctx context.Context, study string) (int, error) {
	if !validUID(study) {
		return 0, fmt.Errorf("%q is not a DICOM UID (digits and dots, at most 64 characters)", study)
	}
	v := url.Values{}
	v.Set("StudyInstanceUID", study)
	v.Add("includefield", "00201208")
	objs, err := c.getJSON(ctx, "/studies", v)
	if err != nil {
		return 0, err
	}
	for _, o := range objs {
		if o.first("0020000D") == study {
			n, err := strconv.Atoi(o.first("00201208"))
			if err != nil {
				return 0, c.fail(0, fmt.Sprintf("gives no NumberOfStudyRelatedInstances for study %s", study), nil)
			}
			return n, nil
		}
	}
	return 0, nil
}

// acceptDICOM asks for the instances as stored (PS3.18 §8.7.3.5.2:
// transfer-syntax=* lets the origin server send any syntax, so it need
// not transcode).
const acceptDICOM = `multipart/related; type="application/dicom"; transfer-syntax=*`

// fetch runs one WADO-RS request and writes every part of the answer into
// dir, calling wrote after each file.
func (c *Client) fetch(ctx context.Context, path, dir string, wrote func(sop string, n int64) error) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	resp, err := c.do(ctx, http.MethodGet, path, nil, acceptDICOM, "", nil)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	// A body that stops flowing for the client's timeout ends the request.
	idle := &idleBody{r: resp.Body, d: c.timeout}
	idle.timer = time.AfterFunc(c.timeout, func() { idle.fired.Store(true); cancel() })
	defer idle.timer.Stop()
	resp.Body = idle
	mt, params, err := mime.ParseMediaType(resp.Header.Get("Content-Type"))
	if err != nil || !strings.EqualFold(mt, "multipart/related") || params["boundary"] == "" {
		return c.fail(resp.StatusCode, fmt.Sprintf("answered %s with %q, want multipart/related", path, resp.Header.Get("Content-Type")), err)
	}
	// Parts are read here and written by a few goroutines, so that the
	// files' creation overlaps the transfer.
	type file struct {
		sop  string
		data []byte
	}
	files := make(chan file, 2*c.workers)
	var (
		wg      sync.WaitGroup
		errOnce sync.Once
		werr    error
	)
	stop := make(chan struct{})
	for w := 0; w < c.workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for f := range files {
				err := writeInstance(filepath.Join(dir, f.sop+FileExt), f.data)
				if err == nil {
					err = wrote(f.sop, int64(len(f.data)))
				}
				if err != nil {
					errOnce.Do(func() { werr = err; close(stop) })
				}
			}
		}()
	}
	err = c.readParts(resp, path, params["boundary"], func(sop string, data []byte) bool {
		select {
		case files <- file{sop, data}:
			return true
		case <-stop:
			return false
		}
	})
	close(files)
	wg.Wait()
	if werr != nil {
		return werr
	}
	if err != nil && idle.expired() {
		return c.fail(resp.StatusCode, fmt.Sprintf("sent no data for %v while answering %s (timeout)", c.timeout, path), err)
	}
	return err
}

// idleBody is a response body whose timer is pushed back by every read;
// when it fires, the request is cancelled.
type idleBody struct {
	r     io.ReadCloser
	timer *time.Timer
	d     time.Duration
	fired atomic.Bool
}

func (b *idleBody) Read(p []byte) (int, error) {
	n, err := b.r.Read(p)
	b.timer.Reset(b.d)
	return n, err
}

func (b *idleBody) Close() error { return b.r.Close() }

func (b *idleBody) expired() bool { return b.fired.Load() }

// readParts reads the parts of a multipart/related answer and hands each
// whole one to put with its SOP Instance UID; put returns false to stop.
func (c *Client) readParts(resp *http.Response, path, boundary string, put func(sop string, data []byte) bool) error {
	mr := multipart.NewReader(resp.Body, boundary)
	parts := 0
	for {
		p, err := mr.NextPart()
		if err == io.EOF {
			break
		}
		if err != nil {
			return c.fail(resp.StatusCode, fmt.Sprintf("answer to %s is cut short or malformed after %d parts", path, parts), err)
		}
		data, err := io.ReadAll(io.LimitReader(p, maxInstanceBytes+1))
		if err != nil {
			return c.fail(resp.StatusCode, fmt.Sprintf("answer to %s is cut short in part %d", path, parts+1), err)
		}
		if len(data) > maxInstanceBytes {
			return c.fail(resp.StatusCode, fmt.Sprintf("part %d of %s is larger than %d bytes", parts+1, path, maxInstanceBytes), nil)
		}
		parts++
		sop, err := SOPInstanceUID(data)
		if err != nil {
			return c.fail(resp.StatusCode, fmt.Sprintf("part %d of %s", parts, path), err)
		}
		if !put(sop, data) {
			return nil
		}
	}
	if parts == 0 {
		return c.fail(resp.StatusCode, "answered "+path+" with no instance", nil)
	}
	return nil
}

// SOPInstanceUID returns MediaStorageSOPInstanceUID (0002,0003) from the
// file meta information of a DICOM Part 10 file (PS3.10 §7.1: a 128-byte
// preamble, "DICM", then group 0002 in explicit VR little endian). The
// value must have the form of a UID, so it is safe as a file name.
func SOPInstanceUID(b []byte) (string, error) {
	if len(b) < 132 || string(b[128:132]) != "DICM" {
		return "", errors.New("not a DICOM Part 10 file (no DICM prefix)")
	}
	p := 132
	for p+8 <= len(b) {
		group := binary.LittleEndian.Uint16(b[p:])
		elem := binary.LittleEndian.Uint16(b[p+2:])
		if group != 2 {
			break
		}
		vr := string(b[p+4 : p+6])
		var n, hdr int
		switch vr {
		case "OB", "OW", "OF", "SQ", "UT", "UN":
			if p+12 > len(b) {
				return "", errors.New("file meta information cut short")
			}
			n, hdr = int(binary.LittleEndian.Uint32(b[p+8:])), 12
		default:
			n, hdr = int(binary.LittleEndian.Uint16(b[p+6:])), 8
		}
		if n < 0 || p+hdr+n > len(b) {
			return "", errors.New("file meta information cut short")
		}
		if elem == 3 {
			uid := string(bytes.TrimRight(b[p+hdr:p+hdr+n], "\x00 "))
			if !validUID(uid) {
				return "", fmt.Errorf("MediaStorageSOPInstanceUID %q is not a UID", uid)
			}
			return uid, nil
		}
		p += hdr + n
	}
	return "", errors.New("no MediaStorageSOPInstanceUID (0002,0003) in the file meta information")
}
