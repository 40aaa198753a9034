package outfile

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"
)

// StaleAge is how long a temporary file must have gone unmodified before a
// later run may remove it, on top of its writer being gone. A writer that is
// alive writes its file in well under a second; an hour leaves a wide margin
// for a clock that is off or a process id that this check cannot see.
const StaleAge = time.Hour

// removeStale removes the temporary files in dir that a ferry process left
// behind when it was killed (SIGKILL, a power cut): those made on this
// machine (same host tag), whose process is no longer running, and that
// nobody has touched for StaleAge. Anything else, a name of another form,
// another machine's file, a live process's, a recent one, is left alone.
// Errors are ignored: this is tidying, not the job.
func removeStale(dir string) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return
	}
	host := hostTag()
	for _, e := range entries {
		name := e.Name()
		if !e.Type().IsRegular() || !strings.HasPrefix(name, tempPrefix) {
			continue
		}
		fields := strings.SplitN(strings.TrimPrefix(name, tempPrefix), "-", 3)
		if len(fields) != 3 || fields[0] != host {
			continue
		}
		pid, err := strconv.Atoi(fields[1])
		if err != nil || pid <= 0 || pid == os.Getpid() || processAlive(pid) {
			continue
		}
		info, err := e.Info()
		if err != nil || time.Since(info.ModTime()) < StaleAge {
			continue
		}
		os.Remove(filepath.Join(dir, name))
	}
}
