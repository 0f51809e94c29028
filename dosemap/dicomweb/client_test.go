package dicomweb

import (
	"encoding/pem"
	"errors"
	"fmt"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// part10 returns a minimal DICOM Part 10 file whose file meta information
// holds sop as MediaStorageSOPInstanceUID (PS3.10 §7.1), padded as PS3.5
// §6.2 requires for UI values of odd length.
func part10(sop string) []byte {
	b := make([]byte, 128, 256)
	b = append(b, "DICM"...)
	v := sop
	if len(v)%2 == 1 {
		v += "\x00"
	}
	b = append(b, 0x02, 0x00, 0x03, 0x00, 'U', 'I', byte(len(v)), byte(len(v)>>8))
	b = append(b, v...)
	return b
}

func TestSOPInstanceUID(t *testing.T) {
	for _, c := range []struct {
		in   []byte
		want string
		err  bool
	}{
		{part10("1.2.3"), "1.2.3", false},
		{part10("1.2.34"), "1.2.34", false},
		{part10("../../etc/passwd"), "", true}, // not a UID: never a file name
		{part10("1.2.3")[:135], "", true},      // cut short
		{[]byte("not dicom"), "", true},
	} {
		got, err := SOPInstanceUID(c.in)
		if got != c.want || (err != nil) != c.err {
			t.Errorf("SOPInstanceUID(%q) = %q, %v", c.in[min(len(c.in), 132):], got, err)
		}
	}
}

func TestParseStudyURL(t *testing.T) {
	for _, c := range []struct {
		in        string
		base, uid string
		ok, err   bool
	}{
		{"http://h:8042/dicom-web/studies/1.2.3", "http://h:8042/dicom-web", "1.2.3", true, false},
		{"https://h/dw/studies/1.2.3/", "https://h/dw", "1.2.3", true, false},
		{"cases/one", "", "", false, false},
		{"http://h/dicom-web/studies/1.2..3", "", "", true, true},
		{"http://h/dicom-web", "", "", true, true},
	} {
		u, ok, err := ParseStudyURL(c.in)
		if ok != c.ok || (err != nil) != c.err || (err == nil && (u.Base != c.base || u.Study != c.uid)) {
			t.Errorf("ParseStudyURL(%q) = %+v, %v, %v", c.in, u, ok, err)
		}
	}
}

func TestAuthHeader(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"", ""},
		{"Aladdin:open sesame", "Basic QWxhZGRpbjpvcGVuIHNlc2FtZQ=="}, // RFC 7617 §2 example
		{"Bearer mF_9.B5f-4.1JqM", "Bearer mF_9.B5f-4.1JqM"},          // RFC 6750 §2.1 example
	} {
		got, err := authHeader(c.in)
		if err != nil || got != c.want {
			t.Errorf("authHeader(%q) = %q, %v; want %q", c.in, got, err, c.want)
		}
	}
	for _, bad := range []string{"tokenwithoutcolon", "Bearer "} {
		if _, err := authHeader(bad); err == nil {
			t.Errorf("authHeader(%q): no error", bad)
		}
	}
}

// fakeArchive serves one study of n instances in one series: QIDO-RS
// lists them; WADO-RS sends them, cut short after cut bytes of the body
// when cut > 0. It checks the bearer token.
func fakeArchive(t *testing.T, n, cut int) *httptest.Server {
	return httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.Header.Get("Authorization") != "Bearer tok" {
			w.WriteHeader(401)
			return
		}
		switch {
		case r.URL.Path == "/dw/studies":
			w.Header().Set("Content-Type", "application/dicom+json")
			fmt.Fprintf(w, `[{"0020000D":{"vr":"UI","Value":["1.8"]},"00201208":{"vr":"IS","Value":[%d]}}]`, n)
		case strings.HasSuffix(r.URL.Path, "/instances"):
			w.Header().Set("Content-Type", "application/dicom+json")
			var items []string
			for i := range n {
				items = append(items, fmt.Sprintf(`{"0020000E":{"vr":"UI","Value":["1.9"]},"00080018":{"vr":"UI","Value":["1.9.%d"]}}`, i+1))
			}
			fmt.Fprintf(w, "[%s]", strings.Join(items, ","))
		case strings.HasPrefix(r.URL.Path, "/dw/studies/1.8"):
			var body strings.Builder
			for i := range n {
				fmt.Fprintf(&body, "--XX\r\nContent-Type: application/dicom\r\n\r\n%s\r\n", part10(fmt.Sprintf("1.9.%d", i+1)))
			}
			body.WriteString("--XX--\r\n")
			s := body.String()
			if cut > 0 {
				s = s[:cut]
			}
			w.Header().Set("Content-Type", `multipart/related; type="application/dicom"; boundary=XX`)
			w.Write([]byte(s))
		default:
			http.NotFound(w, r)
		}
	}))
}

// A body that ends before its closing boundary is an error, and the cache
// gives no folder for it.
func TestTruncatedBody(t *testing.T) {
	whole := fakeArchive(t, 3, 0)
	defer whole.Close()
	c, err := New(whole.URL+"/dw", Options{Auth: "Bearer tok"})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if st, err := c.Retrieve(t.Context(), "1.8", dir, RetrieveOptions{}); err != nil || st.Fetched != 3 {
		t.Fatalf("whole body: %+v, %v", st, err)
	}
	// A folder holding anything else than this study's instances is refused.
	os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("x"), 0o644)
	if _, err := c.Retrieve(t.Context(), "1.8", dir, RetrieveOptions{}); err == nil || !strings.Contains(err.Error(), "notes.txt") {
		t.Errorf("folder with another file: %v; want it refused, naming the file", err)
	}
	for _, cut := range []int{200, 330, 500} { // in a part header, in a part, before the closing boundary
		srv := fakeArchive(t, 3, cut)
		c, _ := New(srv.URL+"/dw", Options{Auth: "Bearer tok"})
		k := &Cache{Root: t.TempDir()}
		got, err := k.Fetch(t.Context(), c, StudyURL{Base: srv.URL + "/dw", Study: "1.8"}, RetrieveOptions{})
		srv.Close()
		if err == nil || got != "" {
			t.Errorf("body cut at %d: folder %q, error %v; want an error", cut, got, err)
			continue
		}
		if !strings.Contains(err.Error(), "cut short") {
			t.Errorf("body cut at %d: %v; want it called cut short", cut, err)
		}
		// Whatever was written is whole files only.
		files, _ := filepath.Glob(filepath.Join(k.Folder(StudyURL{Base: srv.URL + "/dw", Study: "1.8"}), "*"))
		for _, f := range files {
			b, _ := os.ReadFile(f)
			if sop, err := SOPInstanceUID(b); err != nil || filepath.Base(f) != sop+FileExt {
				t.Errorf("body cut at %d: %s is not a whole file", cut, f)
			}
		}
	}
}

// TLS: a server signed by an authority outside the system roots is
// refused, and accepted with that authority given by CAFile.
func TestTLSWithCA(t *testing.T) {
	srv := httptest.NewTLSServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/dicom+json")
		w.Write([]byte("[]"))
	}))
	defer srv.Close()
	plain, _ := New(srv.URL, Options{})
	if _, err := plain.FindStudies(t.Context(), Query{}); err == nil {
		t.Error("a certificate outside the system roots was accepted")
	}
	ca := filepath.Join(t.TempDir(), "ca.pem")
	pemBytes := pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: srv.Certificate().Raw})
	if err := os.WriteFile(ca, pemBytes, 0o600); err != nil {
		t.Fatal(err)
	}
	withCA, err := New(srv.URL, Options{CAFile: ca})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := withCA.FindStudies(t.Context(), Query{}); err != nil {
		t.Errorf("with --ca: %v", err)
	}
	if _, err := New("http://user:pw@host/dw", Options{}); err == nil {
		t.Error("credentials in the address were accepted")
	}
}

// The cache removes the studies used least recently until it fits its
// limit, never the one just retrieved.
func TestCacheTrim(t *testing.T) {
	k := &Cache{Root: t.TempDir(), Limit: 2500}
	mk := func(study string, size int, age time.Duration) string {
		d := k.Folder(StudyURL{Base: "http://a/dw", Study: study})
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(d, "1.2"+FileExt), make([]byte, size), 0o644); err != nil {
			t.Fatal(err)
		}
		when := time.Now().Add(-age)
		os.Chtimes(d, when, when)
		return d
	}
	oldest := mk("1.1", 1000, 3*time.Hour)
	older := mk("1.2", 1000, 2*time.Hour)
	recent := mk("1.3", 1000, time.Hour)
	keep := mk("1.4", 1000, 4*time.Hour) // just retrieved, whatever its time
	if err := k.trim(keep); err != nil {
		t.Fatal(err)
	}
	for d, want := range map[string]bool{oldest: false, older: false, recent: true, keep: true} {
		if _, err := os.Stat(d); (err == nil) != want {
			t.Errorf("%s kept %v, want %v", filepath.Base(d), err == nil, want)
		}
	}
}

// A body that stops flowing is ended after the timeout with a message
// saying so; a server error is named with its status.
func TestStalledBodyAndServerError(t *testing.T) {
	release := make(chan struct{})
	srv := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		switch {
		case r.URL.Path == "/dw/studies":
			w.Header().Set("Content-Type", "application/dicom+json")
			fmt.Fprint(w, `[{"0020000D":{"vr":"UI","Value":["1.8"]},"00201208":{"vr":"IS","Value":[2]}}]`)
		case r.URL.Path == "/dw/studies/1.8":
			w.Header().Set("Content-Type", `multipart/related; type="application/dicom"; boundary=XX`)
			fmt.Fprintf(w, "--XX\r\nContent-Type: application/dicom\r\n\r\n%s\r\n", part10("1.9.1"))
			w.(http.Flusher).Flush()
			select { // stall
			case <-release:
			case <-r.Context().Done():
			}
		default:
			http.Error(w, "database locked", 500)
		}
	}))
	defer srv.Close()
	defer close(release)
	c, err := New(srv.URL+"/dw", Options{Timeout: 300 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	_, err = c.Retrieve(t.Context(), "1.8", t.TempDir(), RetrieveOptions{})
	if err == nil || !strings.Contains(err.Error(), "timeout") {
		t.Errorf("stalled body: %v; want a timeout", err)
	}
	_, err = c.Instances(t.Context(), "1.7")
	var ae *Error
	if !errors.As(err, &ae) || ae.Status != 500 || !strings.Contains(err.Error(), "500") || !strings.Contains(err.Error(), "database locked") {
		t.Errorf("server error: %v; want the status and the server's words", err)
	}
}
