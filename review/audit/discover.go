package audit

import (
	"errors"
	"fmt"
	"hash/fnv"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/safefile"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// Case is one treatment session found below an input folder.
type Case struct {
	// Name is the case's path relative to the parent of the input folder it
	// was found in, slash separated: "registry" for an input folder that is
	// itself a case, "registry/case-007" for one of its subfolders. It is
	// stable across machines as long as the input folders carry the same
	// names, and it is what Shard hashes.
	Name string
	// ID is a file-system-safe form of Name, unique within one run: the
	// folder below OUT_DIR/cases that receives the case's results. In a
	// de-identified run Run replaces it by a pseudonym made from the input
	// hash.
	ID string
	// Dir is the absolute path of the case folder.
	Dir string
	// Files lists every regular file of the case below Dir (slash separated,
	// relative to Dir, sorted bytewise), hidden ones included; symbolic
	// links are not followed.
	Files []string
	// Bytes is the total size of Files.
	Bytes int64
	// InputSHA256 is the case's InputHash; Run sets it before it calls the
	// Analyzer.
	InputSHA256 string
	// Skipped lists the entries below Dir that are not regular files
	// (symbolic links, FIFOs, devices, sockets) as "relative path: reason";
	// they are not read and not hashed.
	Skipped []string
	// Deidentify asks the Analyzer to leave patient identity out of
	// everything it returns.
	Deidentify bool
}

// Discover finds the cases below the given folders. A folder that holds
// DICOM files directly is one case, together with everything below it.
// Otherwise each of its immediate subfolders that holds DICOM files at any
// depth is one case, with everything below it (so a case may keep each
// series in a subfolder of its own) — unless the DICOM files of all those
// subfolders belong to one study (the same StudyInstanceUID, read from the
// first DICOM file of each), in which case the folder given is itself one
// case whose series sit in subfolders. For deeper registries pass the
// folders one level above the cases, e.g. "registry/*/".
//
// Files are recognised as DICOM by their content (IsDICOM), never by name.
// The cases are returned sorted by Name. An input that is not a readable
// folder is an error; unreadable folders below it are skipped and returned
// as problems (one line each, naming the folder).
func Discover(inputs []string) (cases []Case, problems []string, err error) {
	if len(inputs) == 0 {
		return nil, nil, errors.New("no input folder given")
	}
	seen := map[string]bool{}
	for _, in := range inputs {
		abs, err := filepath.Abs(in)
		if err != nil {
			return nil, nil, fmt.Errorf("input folder %s: %w", in, err)
		}
		if err := safefile.CheckDir("input folder", in); err != nil {
			return nil, nil, err
		}
		if seen[abs] {
			continue
		}
		seen[abs] = true
		base := filepath.Base(abs)
		direct, err := holdsDICOMDirectly(abs)
		if err != nil {
			return nil, nil, fmt.Errorf("reading input folder %s: %w", in, err)
		}
		if direct {
			c, err := collect(abs, base)
			if err != nil {
				return nil, nil, err
			}
			cases = append(cases, c)
			continue
		}
		entries, err := os.ReadDir(abs)
		if err != nil {
			return nil, nil, fmt.Errorf("reading input folder %s: %w", in, err)
		}
		var subs []Case
		for _, e := range entries {
			if !e.IsDir() || strings.HasPrefix(e.Name(), ".") {
				continue
			}
			sub := filepath.Join(abs, e.Name())
			has, err := holdsDICOMBelow(sub)
			if err != nil {
				problems = append(problems, fmt.Sprintf("%s: %v", sub, err))
				continue
			}
			if !has {
				continue
			}
			c, err := collect(sub, base+"/"+e.Name())
			if err != nil {
				problems = append(problems, err.Error())
				continue
			}
			subs = append(subs, c)
		}
		if len(subs) > 1 && oneStudy(subs) {
			c, err := collect(abs, base)
			if err != nil {
				return nil, nil, err
			}
			subs = []Case{c}
		}
		cases = append(cases, subs...)
	}
	sort.Slice(cases, func(a, b int) bool { return cases[a].Name < cases[b].Name })
	assignIDs(cases)
	return cases, problems, nil
}

// oneStudy reports whether the first DICOM file of every case names the
// same, non-empty StudyInstanceUID (0020,000D): the folders are then series
// of one examination rather than separate cases.
func oneStudy(cases []Case) bool {
	study := ""
	for _, c := range cases {
		uid := firstStudyUID(c)
		if uid == "" || (study != "" && uid != study) {
			return false
		}
		study = uid
	}
	return true
}

// firstStudyUID returns the StudyInstanceUID of the first file of c that
// parses as DICOM, or "" when none does. A parser panic on a malformed file
// counts as "not DICOM".
func firstStudyUID(c Case) string {
	for _, rel := range c.Files {
		p := filepath.Join(c.Dir, filepath.FromSlash(rel))
		if ok, _ := IsDICOMFile(p); !ok {
			continue
		}
		if uid := studyUIDOf(p); uid != "" {
			return uid
		}
	}
	return ""
}

func studyUIDOf(path string) (uid string) {
	defer func() {
		if recover() != nil {
			uid = ""
		}
	}()
	ds, err := dicomio.ParseFile(path, false)
	if err != nil {
		return ""
	}
	e, err := ds.FindElementByTag(tag.StudyInstanceUID)
	if err != nil {
		return ""
	}
	if v, ok := e.Value.GetValue().([]string); ok && len(v) > 0 {
		return strings.TrimSpace(strings.TrimRight(v[0], "\x00"))
	}
	return ""
}

// holdsDICOMDirectly reports whether dir itself (not a subfolder) holds a
// DICOM file.
func holdsDICOMDirectly(dir string) (bool, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return false, err
	}
	for _, e := range entries {
		if strings.HasPrefix(e.Name(), ".") || e.IsDir() {
			continue
		}
		if ok, _ := IsDICOMFile(filepath.Join(dir, e.Name())); ok {
			return true, nil
		}
	}
	return false, nil
}

var errFound = errors.New("found")

// holdsDICOMBelow reports whether dir or any folder below it holds a DICOM
// file; it stops at the first one.
func holdsDICOMBelow(dir string) (bool, error) {
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if strings.HasPrefix(d.Name(), ".") && p != dir {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		if ok, _ := IsDICOMFile(p); ok {
			return errFound
		}
		return nil
	})
	if err == errFound {
		return true, nil
	}
	return false, err
}

// collect lists the files of the case in dir: every regular file below it
// (hidden ones included; symbolic links are not followed), as the input
// hash takes them.
func collect(dir, name string) (Case, error) {
	c := Case{Name: name, Dir: dir}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.Type().IsRegular() {
			if !d.IsDir() {
				rel, _ := filepath.Rel(dir, p)
				reason := dicomio.SpecialFileReason(d.Type())
				if d.Type()&fs.ModeSymlink != 0 {
					if reason = dicomio.LinkReason(p); reason == "" {
						reason = "symbolic link, not followed"
					}
				}
				c.Skipped = append(c.Skipped, filepath.ToSlash(rel)+": "+reason)
			}
			return nil
		}
		fi, err := d.Info()
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(dir, p)
		if err != nil {
			return err
		}
		c.Files = append(c.Files, filepath.ToSlash(rel))
		c.Bytes += fi.Size()
		return nil
	})
	if err != nil {
		return Case{}, fmt.Errorf("listing case folder %s: %w", dir, err)
	}
	sort.Strings(c.Files)
	return c, nil
}

// assignIDs gives every case a file-system-safe ID derived from its Name;
// names that map to the same ID get a numeric suffix in Name order.
func assignIDs(cases []Case) {
	used := map[string]bool{}
	for n := range cases {
		id := SafeName(cases[n].Name)
		if used[id] {
			for k := 2; ; k++ {
				cand := id + "-" + strconv.Itoa(k)
				if !used[cand] {
					id = cand
					break
				}
			}
		}
		used[id] = true
		cases[n].ID = id
	}
}

// SafeName turns a slash-separated case name into one folder name: letters,
// digits, '.', '-' and '_' are kept, path separators become "__" and any
// other character becomes '_'.
func SafeName(name string) string {
	parts := strings.Split(path.Clean(name), "/")
	for n, p := range parts {
		b := []byte(p)
		for k, ch := range b {
			ok := ch >= 'a' && ch <= 'z' || ch >= 'A' && ch <= 'Z' || ch >= '0' && ch <= '9' || ch == '.' || ch == '-' || ch == '_'
			if !ok {
				b[k] = '_'
			}
		}
		s := strings.Trim(string(b), ".")
		if s == "" {
			s = "_"
		}
		parts[n] = s
	}
	return strings.Join(parts, "__")
}

// IsDICOMFile reports whether the file at p is a regular file that starts
// like a DICOM file (dicomio.SniffFile: the check every part of dosecover
// shares; a FIFO or a device is never opened for a blocking read).
func IsDICOMFile(p string) (bool, error) { return dicomio.SniffFile(p) }

// IsDICOM reports whether head (the first 132 bytes of a file, or all of a
// shorter file) looks like DICOM; see dicomio.IsDICOM.
func IsDICOM(head []byte) bool { return dicomio.IsDICOM(head) }

// Shard selects one part of a case list, so that several machines can share
// a large registry: shard Index of Count (1-based) takes the cases whose
// Name hashes (FNV-1a, 64 bit) to Index-1 modulo Count. The choice depends on
// the case's Name only, so it is the same on every machine and a case keeps
// its shard when other cases are added or removed. The zero Shard takes all.
type Shard struct {
	Index, Count int
}

// ParseShard parses "I/N" with 1 <= I <= N.
func ParseShard(s string) (Shard, error) {
	a, b, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(strings.TrimSpace(a))
	n, err2 := strconv.Atoi(strings.TrimSpace(b))
	if !ok || err1 != nil || err2 != nil || n < 1 || i < 1 || i > n {
		return Shard{}, fmt.Errorf("shard %q: want I/N with 1 <= I <= N, e.g. 2/8", s)
	}
	return Shard{Index: i, Count: n}, nil
}

// String returns "I/N", or "all" for the zero Shard.
func (s Shard) String() string {
	if s.Count <= 1 {
		return "all"
	}
	return fmt.Sprintf("%d/%d", s.Index, s.Count)
}

// Contains reports whether the case named name belongs to the shard.
func (s Shard) Contains(name string) bool {
	if s.Count <= 1 {
		return true
	}
	h := fnv.New64a()
	io.WriteString(h, name)
	return int(h.Sum64()%uint64(s.Count)) == s.Index-1
}

// Select returns the cases of the shard, in their original order.
func (s Shard) Select(cases []Case) []Case {
	var out []Case
	for _, c := range cases {
		if s.Contains(c.Name) {
			out = append(out, c)
		}
	}
	return out
}
