// Package orthanctest starts a real DICOMweb archive for tests: Debian's
// Orthanc with its DICOMweb plugin (packages orthanc, orthanc-dicomweb),
// on a free localhost port, with temporary storage and one user.
//
// Outside continuous integration a missing Orthanc skips the test; with
// CI=true it fails it, so the round trips always run there.
package orthanctest

import (
	"encoding/json"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// Plugin is where Debian's orthanc-dicomweb installs the plugin.
const Plugin = "/usr/share/orthanc/plugins/libOrthancDicomWeb.so"

// Server is a running Orthanc.
type Server struct {
	Root     string // http://127.0.0.1:PORT
	URL      string // DICOMweb root: Root + "/dicom-web"
	User     string
	Password string
	cmd      *exec.Cmd
	done     chan struct{}
}

// Auth returns the credentials in the form of DOSECOVER_ARCHIVE_AUTH.
func (s *Server) Auth() string { return s.User + ":" + s.Password }

func freePort(t testing.TB) int {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// Start runs Orthanc until the test ends.
func Start(t testing.TB) *Server {
	t.Helper()
	bin, err := exec.LookPath("Orthanc")
	if err != nil {
		if _, e := os.Stat("/usr/sbin/Orthanc"); e == nil {
			bin = "/usr/sbin/Orthanc"
		}
	}
	if _, perr := os.Stat(Plugin); bin == "" || perr != nil {
		msg := "Orthanc with its DICOMweb plugin is not installed (Debian orthanc, orthanc-dicomweb)"
		if os.Getenv("CI") == "true" {
			t.Fatal(msg)
		}
		t.Skip(msg)
	}
	dir := t.TempDir()
	port := freePort(t)
	s := &Server{Root: fmt.Sprintf("http://127.0.0.1:%d", port), User: "reviewer", Password: "s3cret-phantom", done: make(chan struct{})}
	s.URL = s.Root + "/dicom-web"
	conf := map[string]any{
		"Name":                  "dosecover-test",
		"StorageDirectory":      filepath.Join(dir, "storage"),
		"IndexDirectory":        filepath.Join(dir, "index"),
		"HttpPort":              port,
		"DicomServerEnabled":    false,
		"DicomPort":             freePort(t),
		"RemoteAccessAllowed":   false,
		"AuthenticationEnabled": true,
		"RegisteredUsers":       map[string]string{s.User: s.Password},
		"Plugins":               []string{Plugin},
		"DicomWeb":              map[string]any{"Enable": true, "Root": "/dicom-web/"},
		"HttpThreadsCount":      8,
	}
	b, _ := json.MarshalIndent(conf, "", "  ")
	cfg := filepath.Join(dir, "orthanc.json")
	if err := os.WriteFile(cfg, b, 0o600); err != nil {
		t.Fatal(err)
	}
	logf, err := os.Create(filepath.Join(dir, "orthanc.log"))
	if err != nil {
		t.Fatal(err)
	}
	s.cmd = exec.Command(bin, cfg)
	s.cmd.Stdout, s.cmd.Stderr = logf, logf
	if err := s.cmd.Start(); err != nil {
		t.Fatalf("starting Orthanc: %v", err)
	}
	go func() { s.cmd.Wait(); logf.Close(); close(s.done) }()
	t.Cleanup(s.Stop)
	deadline := time.Now().Add(30 * time.Second)
	for {
		req, _ := http.NewRequest("GET", s.Root+"/system", nil)
		req.SetBasicAuth(s.User, s.Password)
		resp, err := http.DefaultClient.Do(req)
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == 200 {
				return s
			}
		}
		select {
		case <-s.done:
			log, _ := os.ReadFile(filepath.Join(dir, "orthanc.log"))
			t.Fatalf("Orthanc stopped at start-up:\n%s", log)
		case <-time.After(100 * time.Millisecond):
		}
		if time.Now().After(deadline) {
			t.Fatal("Orthanc did not answer GET /system within 30 s")
		}
	}
}

// Stop ends Orthanc (by its own pid) and waits for it; safe to call twice.
func (s *Server) Stop() {
	select {
	case <-s.done:
		return
	default:
	}
	s.cmd.Process.Signal(os.Interrupt)
	select {
	case <-s.done:
	case <-time.After(10 * time.Second):
		s.cmd.Process.Kill()
		<-s.done
	}
}

// Delete removes one instance through Orthanc's own REST interface (not
// DICOMweb), to simulate an archive that loses an instance.
func (s *Server) Delete(t testing.TB, sopInstanceUID string) {
	t.Helper()
	req, _ := http.NewRequest("POST", s.Root+"/tools/lookup", stringsReader(sopInstanceUID))
	req.SetBasicAuth(s.User, s.Password)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	var found []struct {
		ID   string
		Type string
	}
	json.NewDecoder(resp.Body).Decode(&found)
	resp.Body.Close()
	for _, f := range found {
		if f.Type != "Instance" {
			continue
		}
		req, _ := http.NewRequest("DELETE", s.Root+"/instances/"+f.ID, nil)
		req.SetBasicAuth(s.User, s.Password)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != 200 {
			t.Fatalf("deleting instance %s: %s", sopInstanceUID, resp.Status)
		}
		return
	}
	t.Fatalf("instance %s not found in Orthanc", sopInstanceUID)
}

// Count returns Orthanc's number of stored instances (its /statistics).
func (s *Server) Count(t testing.TB) int {
	req, _ := http.NewRequest("GET", s.Root+"/statistics", nil)
	req.SetBasicAuth(s.User, s.Password)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var st struct{ CountInstances any }
	json.NewDecoder(resp.Body).Decode(&st)
	n, _ := strconv.Atoi(fmt.Sprint(st.CountInstances))
	return n
}

func stringsReader(s string) *strings.Reader { return strings.NewReader(s) }

// resave is run by pydicom: it reads every .dcm file under argv[1] and
// writes it again under argv[2] (same relative path), so the case the
// archive receives was written by an outside DICOM implementation.
const resave = `
import os, sys, pydicom
src, dst = sys.argv[1], sys.argv[2]
for root, _, files in os.walk(src):
    for f in files:
        if not f.endswith('.dcm'):
            continue
        ds = pydicom.dcmread(os.path.join(root, f))
        out = os.path.join(dst, os.path.relpath(root, src))
        os.makedirs(out, exist_ok=True)
        ds.save_as(os.path.join(out, f), write_like_original=False)
`

// Resave has pydicom (run by python py) read every .dcm file under src
// and write it again under dst.
func Resave(py, src, dst string) error {
	if out, err := exec.Command(py, "-c", resave, src, dst).CombinedOutput(); err != nil {
		return fmt.Errorf("pydicom: %v: %s", err, out)
	}
	return nil
}
