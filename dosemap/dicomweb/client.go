// Package dicomweb is a small DICOMweb client (DICOM PS3.18): QIDO-RS to
// search studies and list their instances, WADO-RS to retrieve them as
// multipart/related bodies, STOW-RS to store new objects. It speaks HTTP
// and files only (net/http, mime/multipart) and does no analysis.
//
// Credentials come from the environment variable DOSECOVER_ARCHIVE_AUTH,
// never from the command line: "user:password" for HTTP Basic
// authentication (RFC 7617) or "Bearer TOKEN" (RFC 6750). TLS uses the
// system's roots, plus the certificates of Options.CAFile when given.
//
// A retrieved study is written into a folder, one file per instance named
// by its SOP Instance UID with the extension ".dcm", each written
// atomically (dosemap/safefile). A second retrieval fetches only what is
// missing. A study whose list of instances changes during retrieval, an
// instance listed but not delivered, or a body cut short is an error: the
// caller never receives a partial study as a whole one.
package dicomweb

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"os"
	"sort"
	"strconv"
	"strings"
	"time"
)

// AuthEnv is the environment variable holding the archive credentials:
// "user:password" (HTTP Basic) or "Bearer TOKEN".
const AuthEnv = "DOSECOVER_ARCHIVE_AUTH"

// Options configure a Client.
type Options struct {
	// Auth is the credential in the form of AuthEnv ("" for none).
	Auth string
	// CAFile names a PEM file of extra trusted certificate authorities.
	CAFile string
	// Timeout bounds the wait for a connection, for the answer's headers
	// and, while a body is read, for each next piece of it; 0 means 30 s.
	// A long retrieval may take any time as long as data keep coming.
	Timeout time.Duration
	// Workers is the number of requests at once during retrieval; 0 means 4.
	Workers int
}

// Client talks to one DICOMweb service.
type Client struct {
	timeout time.Duration
	base    *url.URL
	http    *http.Client
	auth    string // value of the Authorization header, "" for none
	workers int
}

// New returns a client for the DICOMweb service rooted at base (for
// example "https://archive.example/dicom-web").
func New(base string, o Options) (*Client, error) {
	u, err := url.Parse(strings.TrimRight(base, "/"))
	if err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
		return nil, fmt.Errorf("archive address %q: want http://HOST[:PORT]/PATH or https://...", base)
	}
	if u.User != nil {
		return nil, fmt.Errorf("archive address %s: credentials in the address are refused; set %s instead", u.Redacted(), AuthEnv)
	}
	auth, err := authHeader(o.Auth)
	if err != nil {
		return nil, err
	}
	tlsConf := &tls.Config{MinVersion: tls.VersionTLS12}
	if o.CAFile != "" {
		pool, err := x509.SystemCertPool()
		if err != nil || pool == nil {
			pool = x509.NewCertPool()
		}
		pem, err := os.ReadFile(o.CAFile)
		if err != nil {
			return nil, fmt.Errorf("--ca: %w", err)
		}
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("--ca %s: no PEM certificate in the file", o.CAFile)
		}
		tlsConf.RootCAs = pool
	}
	timeout := o.Timeout
	if timeout <= 0 {
		timeout = 30 * time.Second
	}
	workers := o.Workers
	if workers <= 0 {
		workers = 4
	}
	tr := &http.Transport{
		Proxy:                 http.ProxyFromEnvironment,
		DialContext:           (&net.Dialer{Timeout: timeout}).DialContext,
		TLSClientConfig:       tlsConf,
		TLSHandshakeTimeout:   timeout,
		ResponseHeaderTimeout: timeout,
		MaxIdleConnsPerHost:   workers,
		IdleConnTimeout:       90 * time.Second,
	}
	return &Client{timeout: timeout, base: u, http: &http.Client{Transport: tr}, auth: auth, workers: workers}, nil
}

// authHeader turns the AuthEnv form into an Authorization header value.
func authHeader(s string) (string, error) {
	s = strings.TrimSpace(s)
	switch {
	case s == "":
		return "", nil
	case strings.HasPrefix(s, "Bearer "):
		tok := strings.TrimSpace(strings.TrimPrefix(s, "Bearer "))
		if tok == "" {
			return "", fmt.Errorf("%s: \"Bearer\" without a token", AuthEnv)
		}
		return "Bearer " + tok, nil
	case strings.Contains(s, ":"):
		user, pass, _ := strings.Cut(s, ":")
		r := &http.Request{Header: http.Header{}}
		r.SetBasicAuth(user, pass)
		return r.Header.Get("Authorization"), nil
	}
	return "", fmt.Errorf("%s: want \"user:password\" or \"Bearer TOKEN\"", AuthEnv)
}

// String returns the service address (without credentials).
func (c *Client) String() string { return c.base.Redacted() }

// Error is a failure reported by, or on the way to, the archive.
type Error struct {
	Archive string // service address
	Status  int    // HTTP status, 0 when no answer came
	Msg     string
	Err     error
}

func (e *Error) Error() string {
	s := "archive " + e.Archive + ": " + e.Msg
	if e.Err != nil {
		s += ": " + e.Err.Error()
	}
	return s
}

func (e *Error) Unwrap() error { return e.Err }

// Refused reports whether the archive refused the credentials (401, 403).
func (e *Error) Refused() bool { return e.Status == 401 || e.Status == 403 }

func (c *Client) fail(status int, msg string, err error) error {
	return &Error{Archive: c.String(), Status: status, Msg: msg, Err: err}
}

// do sends a request to path (relative to the service root) and returns
// the response when its status is 2xx; otherwise a clear error.
func (c *Client) do(ctx context.Context, method, path string, q url.Values, accept, ctype string, body io.Reader) (*http.Response, error) {
	u := *c.base
	u.Path = c.base.Path + path
	if q != nil {
		// Wildcards (PS3.18 §8.3.4.1) go unescaped: some servers match a
		// percent-encoded "*" literally.
		u.RawQuery = strings.ReplaceAll(q.Encode(), "%2A", "*")
	}
	req, err := http.NewRequestWithContext(ctx, method, u.String(), body)
	if err != nil {
		return nil, c.fail(0, "building the request", err)
	}
	if accept != "" {
		req.Header.Set("Accept", accept)
	}
	if ctype != "" {
		req.Header.Set("Content-Type", ctype)
	}
	if c.auth != "" {
		req.Header.Set("Authorization", c.auth)
	}
	resp, err := c.http.Do(req)
	if err != nil {
		if ctx.Err() != nil {
			return nil, c.fail(0, "cancelled", ctx.Err())
		}
		var ne net.Error
		if errors.As(err, &ne) && ne.Timeout() {
			return nil, c.fail(0, "no answer in time (timeout)", err)
		}
		var ue *url.Error
		if errors.As(err, &ue) {
			err = ue.Err // the address is in the message already
		}
		return nil, c.fail(0, "cannot be reached (is it running? is the address right?)", err)
	}
	if resp.StatusCode/100 == 2 {
		return resp, nil
	}
	snippet, _ := io.ReadAll(io.LimitReader(resp.Body, 300))
	resp.Body.Close()
	detail := strings.TrimSpace(string(snippet))
	var msg string
	switch resp.StatusCode {
	case 401:
		msg = "refused the credentials (401 Unauthorized); check " + AuthEnv
	case 403:
		msg = "refused access (403 Forbidden); check " + AuthEnv + " and the account's rights"
	case 404:
		msg = "has no " + path + " (404 Not Found)"
	default:
		msg = fmt.Sprintf("answered %s to %s %s", resp.Status, method, path)
	}
	if detail != "" && resp.StatusCode != 401 {
		msg += " (" + oneLine(detail) + ")"
	}
	return nil, c.fail(resp.StatusCode, msg, nil)
}

func oneLine(s string) string {
	s = strings.Join(strings.Fields(s), " ")
	if len(s) > 200 {
		s = s[:200] + "..."
	}
	return s
}

// dicomJSON is one object of the DICOM JSON model (PS3.18 Annex F).
type dicomJSON map[string]struct {
	VR    string            `json:"vr"`
	Value []json.RawMessage `json:"Value"`
}

// str returns the values of attribute tag (8 hex digits) as strings;
// person names as their alphabetic form.
func (d dicomJSON) str(tag string) []string {
	a, ok := d[tag]
	if !ok {
		return nil
	}
	var out []string
	for _, raw := range a.Value {
		var s string
		if json.Unmarshal(raw, &s) == nil {
			out = append(out, s)
			continue
		}
		var pn struct{ Alphabetic string }
		if json.Unmarshal(raw, &pn) == nil && pn.Alphabetic != "" {
			out = append(out, pn.Alphabetic)
			continue
		}
		var f float64
		if json.Unmarshal(raw, &f) == nil {
			out = append(out, strconv.FormatFloat(f, 'f', -1, 64))
		}
	}
	return out
}

func (d dicomJSON) first(tag string) string {
	if v := d.str(tag); len(v) > 0 {
		return v[0]
	}
	return ""
}

// getJSON runs a QIDO-RS query and decodes its DICOM JSON answer (an empty
// body, or 204, is no match).
func (c *Client) getJSON(ctx context.Context, path string, q url.Values) ([]dicomJSON, error) {
	resp, err := c.do(ctx, http.MethodGet, path, q, "application/dicom+json", "", nil)
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(io.LimitReader(resp.Body, 256<<20))
	if err != nil {
		return nil, c.fail(resp.StatusCode, "reading the answer to "+path, err)
	}
	if len(strings.TrimSpace(string(b))) == 0 {
		return nil, nil
	}
	var out []dicomJSON
	if err := json.Unmarshal(b, &out); err != nil {
		return nil, c.fail(resp.StatusCode, "answer to "+path+" is not DICOM JSON", err)
	}
	return out, nil
}

// Study is one study found by FindStudies.
type Study struct {
	UID         string   `json:"study_instance_uid"`
	PatientID   string   `json:"patient_id"`
	PatientName string   `json:"patient_name"`
	Date        string   `json:"study_date"` // YYYYMMDD as stored
	Description string   `json:"description"`
	Modalities  []string `json:"modalities"`
	Series      int      `json:"series"`
	Instances   int      `json:"instances"`
}

// Query selects studies; empty fields match everything.
type Query struct {
	PatientID string // exact
	Name      string // part of the patient's name (matched as *Name*)
	From, To  string // study date range, YYYYMMDD, either may be empty
}

// FindStudies searches the archive's studies (QIDO-RS, PS3.18 §10.6).
func (c *Client) FindStudies(ctx context.Context, q Query) ([]Study, error) {
	v := url.Values{}
	if q.PatientID != "" {
		v.Set("PatientID", q.PatientID)
	}
	if q.Name != "" {
		v.Set("PatientName", "*"+q.Name+"*")
	}
	if q.From != "" || q.To != "" {
		v.Set("StudyDate", q.From+"-"+q.To)
	}
	for _, f := range []string{"00081030", "00080061", "00201206", "00201208", "00100010", "00100020", "00080020"} {
		v.Add("includefield", f)
	}
	objs, err := c.getJSON(ctx, "/studies", v)
	if err != nil {
		return nil, err
	}
	out := make([]Study, 0, len(objs))
	for _, o := range objs {
		s := Study{
			UID: o.first("0020000D"), PatientID: o.first("00100020"), PatientName: o.first("00100010"),
			Date: o.first("00080020"), Description: o.first("00081030"), Modalities: o.str("00080061"),
		}
		s.Series, _ = strconv.Atoi(o.first("00201206"))
		s.Instances, _ = strconv.Atoi(o.first("00201208"))
		out = append(out, s)
	}
	sort.Slice(out, func(a, b int) bool {
		if out[a].Date != out[b].Date {
			return out[a].Date > out[b].Date
		}
		return out[a].UID < out[b].UID
	})
	return out, nil
}

// Instance names one instance of a study.
type Instance struct {
	Series string // SeriesInstanceUID
	SOP    string // SOPInstanceUID
}

// Instances lists every instance of a study (QIDO-RS), sorted by series
// and SOP Instance UID.
func (c *Client) Instances(ctx context.Context, study string) ([]Instance, error) {
	if !validUID(study) {
		return nil, fmt.Errorf("%q is not a DICOM UID (digits and dots, at most 64 characters)", study)
	}
	v := url.Values{}
	v.Add("includefield", "0020000E")
	objs, err := c.getJSON(ctx, "/studies/"+study+"/instances", v)
	if err != nil {
		return nil, err
	}
	out := make([]Instance, 0, len(objs))
	seen := map[string]bool{}
	for _, o := range objs {
		in := Instance{Series: o.first("0020000E"), SOP: o.first("00080018")}
		if !validUID(in.SOP) || !validUID(in.Series) {
			return nil, c.fail(0, fmt.Sprintf("lists an instance of study %s without valid series and SOP Instance UIDs", study), nil)
		}
		if !seen[in.SOP] {
			seen[in.SOP] = true
			out = append(out, in)
		}
	}
	sort.Slice(out, func(a, b int) bool {
		if out[a].Series != out[b].Series {
			return out[a].Series < out[b].Series
		}
		return out[a].SOP < out[b].SOP
	})
	return out, nil
}

// validUID reports whether s has the form of a DICOM UID (PS3.5 §9.1);
// it also keeps UIDs safe as file names and URL path segments.
func validUID(s string) bool {
	if s == "" || len(s) > 64 || s[0] == '.' || s[len(s)-1] == '.' {
		return false
	}
	for i := 0; i < len(s); i++ {
		ch := s[i]
		if ch != '.' && (ch < '0' || ch > '9') {
			return false
		}
		if ch == '.' && s[i-1] == '.' {
			return false
		}
	}
	return true
}

// ValidUID reports whether s has the form of a DICOM UID (PS3.5 §9.1).
func ValidUID(s string) bool { return validUID(s) }
