package dicomweb

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io/fs"
	"net/url"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"
)

// StudyURL is a study on a DICOMweb service written as one address:
// BASE/studies/UID.
type StudyURL struct {
	Base  string // service root, e.g. http://host:8042/dicom-web
	Study string // StudyInstanceUID
}

// ParseStudyURL recognises "http(s)://.../studies/UID". ok is false for
// anything else (a local folder, for instance).
func ParseStudyURL(s string) (u StudyURL, ok bool, err error) {
	if !strings.HasPrefix(s, "http://") && !strings.HasPrefix(s, "https://") {
		return u, false, nil
	}
	p, perr := url.Parse(s)
	if perr != nil {
		return u, true, fmt.Errorf("%q: %w", s, perr)
	}
	path := strings.TrimRight(p.Path, "/")
	i := strings.LastIndex(path, "/studies/")
	if i < 0 || p.RawQuery != "" {
		return u, true, fmt.Errorf("%q: want BASE/studies/STUDY_UID", s)
	}
	uid := path[i+len("/studies/"):]
	if !validUID(uid) {
		return u, true, fmt.Errorf("%q: %q is not a study UID", s, uid)
	}
	p.Path = path[:i]
	return StudyURL{Base: p.String(), Study: uid}, true, nil
}

// Cache keeps retrieved studies in a folder, one sub-folder per service
// and study, within a size limit: after each retrieval the studies used
// least recently are removed until the total fits.
type Cache struct {
	Root  string
	Limit int64 // bytes; 0 means no limit
}

// DefaultCache returns the cache in the user's cache folder
// ($XDG_CACHE_HOME/dosecover/archive or its platform equivalent), or in
// DOSECOVER_CACHE when set, limited to 20 GB.
func DefaultCache() (*Cache, error) {
	root := os.Getenv("DOSECOVER_CACHE")
	if root == "" {
		d, err := os.UserCacheDir()
		if err != nil {
			return nil, fmt.Errorf("no cache folder: %w (set DOSECOVER_CACHE)", err)
		}
		root = filepath.Join(d, "dosecover", "archive")
	}
	return &Cache{Root: root, Limit: 20 << 30}, nil
}

// Folder returns the cache folder of a study (it may not exist yet).
func (k *Cache) Folder(u StudyURL) string {
	h := sha256.Sum256([]byte(u.Base))
	return filepath.Join(k.Root, hex.EncodeToString(h[:6]), u.Study)
}

// Fetch brings the study up to date in the cache (fetching only what is
// missing; see Client.Retrieve) and returns its folder. On error no folder
// is returned, so a partial study cannot be taken for a whole one.
func (k *Cache) Fetch(ctx context.Context, c *Client, u StudyURL, o RetrieveOptions) (string, error) {
	dir := k.Folder(u)
	if _, err := c.Retrieve(ctx, u.Study, dir, o); err != nil {
		return "", err
	}
	now := time.Now()
	_ = os.Chtimes(dir, now, now) // mark as used
	if err := k.trim(dir); err != nil {
		return "", err
	}
	return dir, nil
}

// trim removes the least recently used studies (never keep) until the
// cache fits its limit.
func (k *Cache) trim(keep string) error {
	if k.Limit <= 0 {
		return nil
	}
	type entry struct {
		dir  string
		size int64
		used time.Time
	}
	var all []entry
	var total int64
	services, _ := os.ReadDir(k.Root)
	for _, s := range services {
		studies, _ := os.ReadDir(filepath.Join(k.Root, s.Name()))
		for _, st := range studies {
			if !st.IsDir() {
				continue
			}
			d := filepath.Join(k.Root, s.Name(), st.Name())
			e := entry{dir: d}
			if fi, err := os.Stat(d); err == nil {
				e.used = fi.ModTime()
			}
			filepath.WalkDir(d, func(_ string, de fs.DirEntry, err error) error {
				if err == nil && !de.IsDir() {
					if fi, err := de.Info(); err == nil {
						e.size += fi.Size()
					}
				}
				return nil
			})
			total += e.size
			all = append(all, e)
		}
	}
	sort.Slice(all, func(a, b int) bool { return all[a].used.Before(all[b].used) })
	for _, e := range all {
		if total <= k.Limit {
			break
		}
		if e.dir == keep {
			continue
		}
		if err := os.RemoveAll(e.dir); err != nil {
			return fmt.Errorf("trimming the archive cache: %w", err)
		}
		total -= e.size
	}
	return nil
}
