package audit

import (
	"errors"
	"fmt"
	"hash/fnv"
	"io"
	"io/fs"
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
	// Study is the StudyInstanceUID (0020,000D) of the case's study; ""
	// when its DICOM files carry none that could be read.
	Study string
	// Deidentify asks the Analyzer to leave patient identity out of
	// everything it returns.
	Deidentify bool
}

// Discover finds the cases below the given folders. A case is one study:
// the DICOM files (recognised by content, IsDICOM, never by name) that share
// one StudyInstanceUID (0020,000D; DICOM PS3.3 C.7.2.1), found at any depth
// whatever the layout: a folder per case, nested registries, a study whose
// series sit in several folders, a flat folder of many studies. Two studies
// of one patient are two cases; a review never mixes studies.
//
// A study's folder is the deepest folder holding all its files, widened
// upwards while the wider folder holds no other study, up to a folder just
// below the input (so a case keeps its case folder however its series are
// arranged inside, and a registry's case keeps its name when other cases
// are added beside it). When that folder
// holds this study only, the case is every regular file below it (hidden
// ones included: the input hash covers them) and its Name is the folder's
// path; when it holds other studies too (a flat folder), the case is the
// study's DICOM files plus the files below the folder that are no study's
// DICOM file and lie in no other study's folder, and its Name is the
// folder's path followed by "/study-" and the StudyInstanceUID. DICOM files
// whose StudyInstanceUID cannot be read belong to the study whose folder
// holds them; elsewhere they make one case per folder below the input
// (the analysis then reports what is wrong with them).
//
// Names are paths relative to the parent of the input folder, slash
// separated, so they are the same on every machine and across runs with
// the same inputs. The cases are returned sorted by Name. An input that is
// not a readable folder is an error; unreadable folders below it are
// skipped and returned as problems (one line each, naming the folder).
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
		found, probs, err := studiesBelow(abs)
		if err != nil {
			return nil, nil, fmt.Errorf("reading input folder %s: %w", in, err)
		}
		problems = append(problems, probs...)
		cases = append(cases, found...)
	}
	sort.Slice(cases, func(a, b int) bool { return cases[a].Name < cases[b].Name })
	assignIDs(cases)
	return cases, problems, nil
}

// caseFile is one regular file below an input folder.
type caseFile struct {
	rel   string // slash separated, relative to the input folder
	size  int64
	dicom bool
	study string // StudyInstanceUID; "" when not DICOM or not readable
}

// parentDir returns the folder of a slash-separated relative path ("" for
// the input folder itself).
func parentDir(rel string) string {
	if i := strings.LastIndexByte(rel, '/'); i >= 0 {
		return rel[:i]
	}
	return ""
}

// within reports whether rel lies in folder dir ("" holds everything).
func within(rel, dir string) bool {
	return dir == "" || strings.HasPrefix(rel, dir+"/")
}

// commonDir returns the deepest folder holding every path of rels.
func commonDir(rels []string) string {
	d := parentDir(rels[0])
	for _, r := range rels[1:] {
		for !within(r, d) {
			d = parentDir(d)
		}
	}
	return d
}

// studiesBelow lists the files below the input folder abs and groups them
// into cases, one per study (see Discover).
func studiesBelow(abs string) ([]Case, []string, error) {
	base := filepath.Base(abs)
	var files []caseFile
	var problems []string
	err := filepath.WalkDir(abs, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			if p == abs {
				return err
			}
			problems = append(problems, fmt.Sprintf("%s: %v", p, err))
			if d != nil && d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if !d.Type().IsRegular() {
			if !d.IsDir() {
				// Listed, not read (a FIFO would block a reader) and not
				// hashed.
				reason := dicomio.SpecialFileReason(d.Type())
				if d.Type()&fs.ModeSymlink != 0 {
					if reason = dicomio.LinkReason(p); reason == "" {
						reason = "symbolic link, not followed"
					}
				}
				problems = append(problems, fmt.Sprintf("%s: %s", p, reason))
			}
			return nil
		}
		fi, err := d.Info()
		if err != nil {
			problems = append(problems, fmt.Sprintf("%s: %v", p, err))
			return nil
		}
		rel, err := filepath.Rel(abs, p)
		if err != nil {
			return err
		}
		f := caseFile{rel: filepath.ToSlash(rel), size: fi.Size()}
		if !hiddenPath(f.rel) {
			if ok, _ := IsDICOMFile(p); ok {
				f.dicom = true
				f.study = studyUIDOf(p)
			}
		}
		files = append(files, f)
		return nil
	})
	if err != nil {
		return nil, nil, err
	}
	sort.Slice(files, func(a, b int) bool { return files[a].rel < files[b].rel })
	// The studies under every folder.
	under := map[string]map[string]bool{}
	byStudy := map[string][]string{}
	var uids []string
	for _, f := range files {
		if f.study == "" {
			continue
		}
		if byStudy[f.study] == nil {
			uids = append(uids, f.study)
		}
		byStudy[f.study] = append(byStudy[f.study], f.rel)
		for d := parentDir(f.rel); ; d = parentDir(d) {
			if under[d] == nil {
				under[d] = map[string]bool{}
			}
			under[d][f.study] = true
			if d == "" {
				break
			}
		}
	}
	dirOf := map[string]string{}
	for _, uid := range uids {
		d := commonDir(byStudy[uid])
		for d != "" && parentDir(d) != "" && len(under[parentDir(d)]) == 1 {
			d = parentDir(d)
		}
		dirOf[uid] = d
	}
	// inOtherStudy reports whether rel lies in the folder of a study other
	// than uid, strictly below dir.
	inOtherStudy := func(rel, dir, uid string) bool {
		for d := parentDir(rel); d != dir && within(d+"/", dir); d = parentDir(d) {
			if len(under[d]) > 0 && !under[d][uid] {
				return true
			}
			if d == "" {
				break
			}
		}
		return false
	}
	name := func(d string) string {
		if d == "" {
			return base
		}
		return base + "/" + d
	}
	var cases []Case
	covered := func(rel string) bool {
		for _, d := range dirOf {
			if within(rel, d) {
				return true
			}
		}
		return false
	}
	for _, uid := range uids {
		d := dirOf[uid]
		c := Case{Name: name(d), Dir: filepath.Join(abs, filepath.FromSlash(d)), Study: uid}
		exclusive := len(under[d]) == 1
		if !exclusive {
			c.Name += "/study-" + uid
		}
		for _, f := range files {
			if !within(f.rel, d) {
				continue
			}
			if !exclusive && (f.study != "" && f.study != uid || f.study == "" && inOtherStudy(f.rel, d, uid)) {
				continue
			}
			c.Files = append(c.Files, f.rel[len(d)+boolInt(d != ""):])
			c.Bytes += f.size
		}
		cases = append(cases, c)
	}
	// DICOM files without a readable study outside every study's folder:
	// one case per folder below the input (or the input itself).
	orphans := map[string][]string{}
	var tops []string
	for _, f := range files {
		if !f.dicom || f.study != "" || covered(f.rel) {
			continue
		}
		top, _, nested := strings.Cut(f.rel, "/")
		if !nested || len(under[top]) > 0 {
			top = "" // loose at the input's top, or beside a study
			if nested {
				top = parentDir(f.rel)
			}
		}
		if orphans[top] == nil {
			tops = append(tops, top)
		}
		orphans[top] = append(orphans[top], f.rel)
	}
	inOtherTop := func(rel, top string) bool {
		for _, t := range tops {
			if t != top && len(t) > len(top) && within(rel, t) {
				return true
			}
		}
		return false
	}
	for _, top := range tops {
		c := Case{Name: name(top), Dir: filepath.Join(abs, filepath.FromSlash(top))}
		if len(under[top]) > 0 || len(uids) > 0 && top == "" {
			c.Name += "/unidentified"
		}
		for _, f := range files {
			if !within(f.rel, top) || covered(f.rel) || f.dicom && f.study != "" || inOtherTop(f.rel, top) {
				continue
			}
			c.Files = append(c.Files, f.rel[len(top)+boolInt(top != ""):])
			c.Bytes += f.size
		}
		cases = append(cases, c)
	}
	return cases, problems, nil
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}

// hiddenPath reports whether a file or any folder on its relative path
// starts with a dot: such files are never taken for DICOM files of a case.
func hiddenPath(rel string) bool {
	for _, part := range strings.Split(rel, "/") {
		if strings.HasPrefix(part, ".") {
			return true
		}
	}
	return false
}

// studyUIDOf returns the StudyInstanceUID of the DICOM file at path, or ""
// when it has none or cannot be parsed (a parser panic on a malformed file
// counts as unreadable).
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
