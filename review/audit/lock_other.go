//go:build !unix

package audit

// LockFile is the file in an output folder that runs lock while they
// write there; not used on this system.
const LockFile = ".audit.lock"

// lockOutDir takes no lock on this system: a run is alone (and cleans)
// only when it is not a shard.
func lockOutDir(outDir, given string, shard bool, clean func() error) (release func(), alone bool, err error) {
	if !shard && clean != nil {
		if err := clean(); err != nil {
			return nil, false, err
		}
	}
	return func() {}, !shard, nil
}
