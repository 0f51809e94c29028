//go:build cgo

package main

import (
	"bytes"
	"crypto/rand"
	"fmt"
	"net"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"regexp"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

// slurmScript is the job script README shows (TestSlurmScriptInREADME).
const slurmScript = "../assets/audit-slurm.sh"

// slurmCluster is a one-node Slurm cluster from Debian's slurm-wlm and
// munge, started by a test as root: its own munge key and socket, its own
// ports on 127.0.0.1, state and logs in a temporary folder.
type slurmCluster struct {
	dir string
	env []string // SLURM_CONF for the client commands
}

// needSlurm skips the test where a cluster cannot be started: not as root,
// or (outside CI) without the Debian packages. In CI a missing package is
// a failure: .ci/setup installs them.
func needSlurm(t *testing.T) {
	t.Helper()
	if testing.Short() {
		t.Skip("starts a one-node Slurm cluster; skipped with -short")
	}
	if os.Geteuid() != 0 {
		t.Skip("Slurm test skipped: starting munged, slurmctld and slurmd needs root (CI runs as root)")
	}
	var missing []string
	for _, c := range []string{"munged", "slurmctld", "slurmd", "sbatch", "squeue", "scontrol", "sinfo"} {
		if _, err := exec.LookPath(c); err != nil {
			missing = append(missing, c)
		}
	}
	if _, err := user.Lookup("munge"); err != nil {
		missing = append(missing, "user munge")
	}
	if len(missing) > 0 {
		msg := fmt.Sprintf("%s not found: install the Debian packages slurm-wlm and munge (.ci/setup does)", strings.Join(missing, ", "))
		if os.Getenv("CI") == "true" {
			t.Fatal("CI must run the Slurm test: " + msg)
		}
		t.Skip("Slurm test skipped: " + msg)
	}
}

// freePorts returns n TCP ports free on 127.0.0.1 just now.
func freePorts(t *testing.T, n int) []int {
	t.Helper()
	var ports []int
	var ls []net.Listener
	for range n {
		l, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		ls = append(ls, l)
		ports = append(ports, l.Addr().(*net.TCPAddr).Port)
	}
	for _, l := range ls {
		l.Close()
	}
	return ports
}

// memoryMB returns the machine's memory in MB (from /proc/meminfo), at
// least 4096 so that jobs asking for the README's memory fit the node.
func memoryMB() int {
	b, _ := os.ReadFile("/proc/meminfo")
	for _, line := range strings.Split(string(b), "\n") {
		if f := strings.Fields(line); len(f) >= 2 && f[0] == "MemTotal:" {
			if kb, err := strconv.Atoi(f[1]); err == nil && kb/1024 > 4096 {
				return kb / 1024
			}
		}
	}
	return 4096
}

// startSlurm starts munged (as the munge user), slurmctld and slurmd, waits
// until the node is idle, and stops them when the test ends.
func startSlurm(t *testing.T) *slurmCluster {
	t.Helper()
	needSlurm(t)
	dir, err := os.MkdirTemp("", "dosecover-slurm-")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { os.RemoveAll(dir) }) // runs last
	os.Chmod(dir, 0o755)                    // munged must reach its folders
	mu, _ := user.Lookup("munge")
	uid, _ := strconv.Atoi(mu.Uid)
	gid, _ := strconv.Atoi(mu.Gid)

	// munge: key (1024 random bytes, mode 400), key/log/seed folder 700
	// and socket folder 755, all owned by the munge user.
	keyDir, runDir := filepath.Join(dir, "munge"), filepath.Join(dir, "munge-run")
	key := make([]byte, 1024)
	rand.Read(key)
	for _, d := range []string{keyDir, runDir} {
		if err := os.Mkdir(d, 0o700); err != nil {
			t.Fatal(err)
		}
		os.Chown(d, uid, gid)
	}
	os.Chmod(runDir, 0o755)
	keyFile := filepath.Join(keyDir, "munge.key")
	if err := os.WriteFile(keyFile, key, 0o400); err != nil {
		t.Fatal(err)
	}
	os.Chown(keyFile, uid, gid)
	socket := filepath.Join(runDir, "munge.socket")
	munged := exec.Command("munged", "--foreground", "--key-file="+keyFile, "--socket="+socket,
		"--pid-file="+filepath.Join(runDir, "munged.pid"), "--log-file="+filepath.Join(keyDir, "munged.log"),
		"--seed-file="+filepath.Join(keyDir, "munged.seed"))
	munged.SysProcAttr = &syscall.SysProcAttr{Credential: &syscall.Credential{Uid: uint32(uid), Gid: uint32(gid)}}
	var mungedOut bytes.Buffer
	munged.Stdout, munged.Stderr = &mungedOut, &mungedOut
	if err := munged.Start(); err != nil {
		t.Fatalf("starting munged: %v", err)
	}
	t.Cleanup(func() { stopProcess(t, munged, "munged", 0) })
	waitFor(t, "the munge socket", 10*time.Second, func() bool { _, err := os.Stat(socket); return err == nil },
		func() string { return mungedOut.String() + readTail(filepath.Join(keyDir, "munged.log")) })

	host, _ := os.Hostname()
	host, _, _ = strings.Cut(host, ".")
	ports := freePorts(t, 2)
	sdir := filepath.Join(dir, "slurm")
	for _, d := range []string{"state", "spool", "log"} {
		if err := os.MkdirAll(filepath.Join(sdir, d), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	conf := filepath.Join(sdir, "slurm.conf")
	cpus := max(runtime.NumCPU(), 2) // the README's tasks ask for 2
	err = os.WriteFile(conf, []byte(fmt.Sprintf(`ClusterName=dosecover-test
SlurmctldHost=%[1]s(127.0.0.1)
SlurmctldPort=%[2]d
SlurmdPort=%[3]d
CommunicationParameters=NoInAddrAny,NoCtldInAddrAny
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=%[4]s
SlurmUser=root
StateSaveLocation=%[5]s/state
SlurmdSpoolDir=%[5]s/spool
SlurmctldPidFile=%[5]s/slurmctld.pid
SlurmdPidFile=%[5]s/slurmd.pid
SlurmctldLogFile=%[5]s/log/slurmctld.log
SlurmdLogFile=%[5]s/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SlurmdParameters=config_overrides
ReturnToService=2
JobAcctGatherType=jobacct_gather/none
MpiDefault=none
NodeName=%[1]s NodeAddr=127.0.0.1 CPUs=%[6]d RealMemory=%[7]d State=UNKNOWN
PartitionName=main Nodes=%[1]s Default=YES MaxTime=INFINITE State=UP
`, host, ports[0], ports[1], socket, sdir, cpus, memoryMB())), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	c := &slurmCluster{dir: dir, env: append(os.Environ(), "SLURM_CONF="+conf)}
	logs := func() string {
		return readTail(filepath.Join(sdir, "log", "slurmctld.log")) + readTail(filepath.Join(sdir, "log", "slurmd.log"))
	}
	for _, d := range []string{"slurmctld", "slurmd"} {
		p := exec.Command(d, "-D", "-f", conf)
		p.Env = c.env
		if err := p.Start(); err != nil {
			t.Fatalf("starting %s: %v", d, err)
		}
		t.Cleanup(func() { stopProcess(t, p, d, 10*time.Second) })
	}
	t.Cleanup(func() {
		// Stops slurmctld and slurmd; stopProcess then only waits.
		c.cmd("scontrol", "shutdown").Run()
	})
	waitFor(t, "the node idle", 30*time.Second, func() bool {
		out, _ := c.cmd("sinfo", "-h", "-o", "%t").Output()
		return strings.TrimSpace(string(out)) == "idle"
	}, logs)
	return c
}

// cmd returns a Slurm client command for the cluster.
func (c *slurmCluster) cmd(name string, args ...string) *exec.Cmd {
	cmd := exec.Command(name, args...)
	cmd.Env = c.env
	return cmd
}

// stopProcess ends a daemon the test started: it waits grace for the
// daemon to stop by itself, then sends SIGTERM, and SIGKILL ten seconds
// later.
func stopProcess(t *testing.T, p *exec.Cmd, name string, grace time.Duration) {
	done := make(chan struct{})
	go func() { p.Wait(); close(done) }()
	select {
	case <-done:
		return
	case <-time.After(grace):
	}
	p.Process.Signal(syscall.SIGTERM)
	select {
	case <-done:
	case <-time.After(10 * time.Second):
		t.Logf("%s did not stop on SIGTERM; killing it", name)
		p.Process.Kill()
		<-done
	}
}

// waitFor polls ok until it holds or limit passes; then it fails with
// what logs returns.
func waitFor(t *testing.T, what string, limit time.Duration, ok func() bool, logs func() string) {
	t.Helper()
	end := time.Now().Add(limit)
	for !ok() {
		if time.Now().After(end) {
			t.Fatalf("waiting for %s: nothing after %v\n%s", what, limit, logs())
		}
		time.Sleep(200 * time.Millisecond)
	}
}

// readTail returns the last lines of a log file.
func readTail(p string) string {
	b, _ := os.ReadFile(p)
	lines := strings.Split(strings.TrimRight(string(b), "\n"), "\n")
	if len(lines) > 30 {
		lines = lines[len(lines)-30:]
	}
	return "--- " + p + "\n" + strings.Join(lines, "\n") + "\n"
}

// TestAuditOnSlurm submits README's job script (assets/audit-slurm.sh) to a
// one-node Slurm cluster: two shard tasks of simulated cases as a job
// array, then the merge after them (--dependency=afterok). The reference
// is a whole audit of the same cases on one machine: the merged
// summary.csv must equal its table (timing columns aside), errors.csv and
// summary.png its files byte for byte. Then shard 2 is made to look killed:
// the merge refuses it, and the script submitting shard 2 alone
// (AUDIT_ARRAY=2) with a new merge completes the audit again.
func TestAuditOnSlurm(t *testing.T) {
	c := startSlurm(t)
	in, whole := auditReference(t)
	jobs := t.TempDir()
	os.Chmod(jobs, 0o755)
	out := filepath.Join(jobs, "audit")
	script, err := filepath.Abs(slurmScript)
	if err != nil {
		t.Fatal(err)
	}
	path := "PATH=" + commandDir(t) + string(os.PathListSeparator) + os.Getenv("PATH")
	logs := func() string {
		var b strings.Builder
		q, _ := c.cmd("squeue", "-a").CombinedOutput()
		b.Write(q)
		files, _ := filepath.Glob(filepath.Join(jobs, "*.log"))
		for _, f := range files {
			b.WriteString(readTail(f))
		}
		b.WriteString(readTail(filepath.Join(c.dir, "slurm", "log", "slurmctld.log")))
		return b.String()
	}
	// submit runs the script, waits until the cluster is idle and checks
	// that every shard task ended well, the one with the damaged case too
	// (the script counts a finished shard as done), and that the merge
	// ran and, like the audit, exited 1 for the failed case.
	submit := func(tasks int, env ...string) {
		t.Helper()
		sub := c.cmd("bash", script, in, out, "2")
		sub.Dir = jobs
		sub.Env = append(append(sub.Env, path), env...)
		said, err := sub.CombinedOutput()
		if err != nil {
			t.Fatalf("submitting: %v\n%s", err, said)
		}
		m := regexp.MustCompile(`shards: job (\d+) .*merge: job (\d+)`).FindStringSubmatch(string(said))
		if m == nil {
			t.Fatalf("submitting: no job ids in %q", said)
		}
		shards, merge := m[1], m[2]
		waitFor(t, "the shards and the merge", 3*time.Minute, func() bool {
			q, err := c.cmd("squeue", "-h", "-o", "%i").Output()
			return err == nil && strings.TrimSpace(string(q)) == ""
		}, logs)
		for _, id := range []string{shards, merge} {
			st, err := c.cmd("scontrol", "show", "job", id).CombinedOutput()
			if err != nil {
				t.Fatalf("scontrol show job %s: %v\n%s", id, err, st)
			}
			states := regexp.MustCompile(`JobState=(\S+) .*\n(?:.*\n)*?\s*Requeue=.* ExitCode=(\S+)`).FindAllStringSubmatch(string(st), -1)
			want, wantCode, n := "COMPLETED", "0:0", tasks
			if id == merge {
				want, wantCode, n = "FAILED", "1:0", 1
			}
			if len(states) != n {
				t.Errorf("job %s: %d tasks, want %d:\n%s", id, len(states), n, st)
			}
			for _, s := range states {
				if s[1] != want || s[2] != wantCode {
					t.Errorf("job %s: state %s, exit code %s; want %s, %s\n%s", id, s[1], s[2], want, wantCode, logs())
				}
			}
		}
		mergeLog, err := os.ReadFile(filepath.Join(jobs, "dosecover-merge-"+merge+".log"))
		if err != nil || !mergeCounts(string(mergeLog)) {
			t.Errorf("merge log: %v\n%s", err, mergeLog)
		}
		t.Logf("merge job %s after shard array %s:\n%s", merge, shards, mergeLog)
		for i := 1; i <= 2; i++ {
			st, err := os.ReadFile(filepath.Join(out, fmt.Sprintf("shard-%d-of-2.json", i)))
			if err != nil || !strings.Contains(string(st), `"state": "finished"`) {
				t.Errorf("shard %d/2 state: %v\n%.300s", i, err, st)
			}
		}
		sameSummaries(t, whole, out)
	}
	submit(2)

	// Shard 2 as a killed task leaves it: state running, its process gone.
	gone := exec.Command("true")
	if err := gone.Run(); err != nil {
		t.Fatal(err)
	}
	statePath := filepath.Join(out, "shard-2-of-2.json")
	st, err := os.ReadFile(statePath)
	if err != nil {
		t.Fatal(err)
	}
	killed := strings.Replace(string(st), `"state": "finished"`, `"state": "running"`, 1)
	killed = regexp.MustCompile(`"pid": \d+,`).ReplaceAllString(killed, fmt.Sprintf(`"pid": %d,`, gone.Process.Pid))
	if err := os.WriteFile(statePath, []byte(killed), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"summary.csv", "errors.csv", "summary.png"} {
		os.Remove(filepath.Join(out, f))
	}
	var so, se bytes.Buffer
	if code := run([]string{"audit", "merge", out}, &so, &se); code != 1 || !strings.Contains(se.String(), "shard 2/2 did not finish") {
		t.Fatalf("merge with shard 2 killed: exit %d, %q; want 1 naming shard 2/2", code, se.String())
	}
	submit(1, "AUDIT_ARRAY=2")
}

// README shows the job script the Slurm test submits, verbatim (indented
// as a code block).
func TestSlurmScriptInREADME(t *testing.T) {
	script, err := os.ReadFile(slurmScript)
	if err != nil {
		t.Fatal(err)
	}
	readme, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	var block strings.Builder
	for _, line := range strings.SplitAfter(string(script), "\n") {
		if strings.TrimSpace(line) != "" {
			block.WriteString("    ")
		}
		block.WriteString(line)
	}
	if !strings.Contains(string(readme), block.String()) {
		t.Errorf("README.md does not show %s verbatim (as a code block indented by four spaces); copy it again", slurmScript)
	}
}
