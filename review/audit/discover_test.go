package audit

import (
	"fmt"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"dosecover/dosemap/testkit"
)

// TestIsDICOMOnOutsideFiles checks detection against the test files of
// python3-pydicom: Part 10 files with preamble, files written without
// preamble and meta header, and files of that folder that are not DICOM.
func TestIsDICOMOnOutsideFiles(t *testing.T) {
	dir := testkit.PydicomTestFiles(t)
	for _, c := range []struct {
		file string
		want bool
	}{
		{"MR_small.dcm", true},          // Part 10, explicit VR little endian
		{"MR_small_implicit.dcm", true}, // Part 10 with a TIFF header in the preamble
		{"MR_small_bigendian.dcm", true},
		{"rtstruct.dcm", true},            // no preamble: implicit VR, starts with (0008,0005)
		{"ExplVR_LitEndNoMeta.dcm", true}, // no preamble, explicit VR little endian
		{"ExplVR_BigEndNoMeta.dcm", true}, // no preamble, explicit VR big endian
		{"rtdose.dcm", true},
		{"README.txt", false},
		{"test1.json", false}, // DICOM JSON model, not a DICOM file
		{"rtplan.dump", false},
		{"zipMR.gz", false},
	} {
		got, err := IsDICOMFile(filepath.Join(dir, c.file))
		if err != nil {
			t.Errorf("%s: %v", c.file, err)
			continue
		}
		if got != c.want {
			t.Errorf("IsDICOMFile(%s) = %v, want %v", c.file, got, c.want)
		}
	}
}

func TestDiscover(t *testing.T) {
	root := filepath.Join(t.TempDir(), "registry")
	writeFiles(t, root, map[string][]byte{
		"flat/a.dcm":                  fakeDICOM("a"),
		"flat/b.dcm":                  fakeDICOM("b"),
		"flat/notes.txt":              []byte("operator notes"),
		"nested/anatomy/IM0001":       fakeDICOM("no extension, still DICOM"),
		"nested/sonication-1/IM0001":  fakeDICOM("phase"),
		"nested/.cache/x":             []byte("hidden"),
		"textonly/readme.dcm":         []byte("named .dcm but not DICOM"),
		"empty/.keep":                 nil,
		"odd name (copy)/img.dcm":     fakeDICOM("odd"),
		"odd name [copy]/img.dcm":     fakeDICOM("odd2"),
		"loose-file-at-root.txt":      []byte("x"),
		"deep/level2/series/IM1":      fakeDICOM("deep"),
		"deep/level2/series/IM2.json": []byte("{}"),
	})
	cases, problems, err := Discover([]string{root})
	if err != nil {
		t.Fatal(err)
	}
	if len(problems) != 0 {
		t.Errorf("problems: %v", problems)
	}
	type got struct {
		Name, ID string
		Files    []string
	}
	var gs []got
	for _, c := range cases {
		gs = append(gs, got{c.Name, c.ID, c.Files})
		if !filepath.IsAbs(c.Dir) {
			t.Errorf("%s: Dir %s not absolute", c.Name, c.Dir)
		}
	}
	want := []got{
		{"registry/deep", "registry__deep", []string{"level2/series/IM1", "level2/series/IM2.json"}},
		{"registry/flat", "registry__flat", []string{"a.dcm", "b.dcm", "notes.txt"}},
		{"registry/nested", "registry__nested", []string{".cache/x", "anatomy/IM0001", "sonication-1/IM0001"}},
		{"registry/odd name (copy)", "registry__odd_name__copy_", []string{"img.dcm"}},
		{"registry/odd name [copy]", "registry__odd_name__copy_-2", []string{"img.dcm"}},
	}
	if !reflect.DeepEqual(gs, want) {
		t.Errorf("Discover:\n got %+v\nwant %+v", gs, want)
	}

	// A folder that holds DICOM files directly is one case with its subfolders.
	cases, _, err = Discover([]string{filepath.Join(root, "nested", "anatomy"), filepath.Join(root, "flat")})
	if err != nil {
		t.Fatal(err)
	}
	if len(cases) != 2 || cases[0].Name != "anatomy" || cases[1].Name != "flat" {
		t.Errorf("direct cases: %+v", cases)
	}

	for _, bad := range [][]string{nil, {filepath.Join(root, "missing")}, {filepath.Join(root, "flat", "a.dcm")}} {
		if _, _, err := Discover(bad); err == nil {
			t.Errorf("Discover(%v): no error", bad)
		}
	}
}

func TestParseShard(t *testing.T) {
	for _, c := range []struct {
		in   string
		want Shard
		ok   bool
	}{
		{"1/1", Shard{1, 1}, true},
		{"2/8", Shard{2, 8}, true},
		{" 8 / 8 ", Shard{8, 8}, true},
		{"0/4", Shard{}, false},
		{"5/4", Shard{}, false},
		{"1/0", Shard{}, false},
		{"1", Shard{}, false},
		{"a/b", Shard{}, false},
		{"-1/4", Shard{}, false},
	} {
		got, err := ParseShard(c.in)
		if (err == nil) != c.ok || got != c.want {
			t.Errorf("ParseShard(%q) = %v, %v; want %v ok=%v", c.in, got, err, c.want, c.ok)
		}
	}
}

// TestShardPartition checks that the shards of every count cover each case
// exactly once, that the split is the same on every call and that a case
// keeps its shard when other cases are added.
func TestShardPartition(t *testing.T) {
	var cases []Case
	for k := range 300 {
		cases = append(cases, Case{Name: fmt.Sprintf("registry/2025/case-%04d", k)})
	}
	for n := 1; n <= 7; n++ {
		seen := map[string]int{}
		sizes := make([]int, n)
		for i := 1; i <= n; i++ {
			sel := Shard{i, n}.Select(cases)
			again := Shard{i, n}.Select(cases)
			if !reflect.DeepEqual(sel, again) {
				t.Fatalf("shard %d/%d differs between calls", i, n)
			}
			sizes[i-1] = len(sel)
			for _, c := range sel {
				seen[c.Name]++
			}
		}
		for _, c := range cases {
			if seen[c.Name] != 1 {
				t.Errorf("n=%d: case %s in %d shards", n, c.Name, seen[c.Name])
			}
		}
		// Balance: with 300 cases a hash split should put at least half the
		// mean into every shard (loose bound; common practice for hashing).
		for i, s := range sizes {
			if s < 300/n/2 {
				t.Errorf("n=%d: shard %d holds only %d cases: %v", n, i+1, s, sizes)
			}
		}
	}
	// Stability: adding cases never moves an existing case.
	more := append(append([]Case{}, cases...), Case{Name: "registry/2026/case-0001"}, Case{Name: "a/first"})
	for i := 1; i <= 4; i++ {
		before := map[string]bool{}
		for _, c := range (Shard{i, 4}).Select(cases) {
			before[c.Name] = true
		}
		for _, c := range (Shard{i, 4}).Select(more) {
			if strings.HasPrefix(c.Name, "registry/2025") && !before[c.Name] {
				t.Errorf("case %s moved into shard %d/4", c.Name, i)
			}
		}
	}
	if got := (Shard{}).Select(cases); len(got) != len(cases) {
		t.Errorf("zero shard selects %d of %d", len(got), len(cases))
	}
}

func TestSafeName(t *testing.T) {
	for _, c := range [][2]string{
		{"registry/case-001", "registry__case-001"},
		{"a b/c:d", "a_b__c_d"},
		{"..", "_"},
		{"x/.hidden", "x__hidden"},
		{"ünï", "__n__"}, // each byte of a multi-byte UTF-8 letter becomes _
	} {
		if got := SafeName(c[0]); got != c[1] {
			t.Errorf("SafeName(%q) = %q, want %q", c[0], got, c[1])
		}
	}
}
