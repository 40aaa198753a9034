package simulate

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
)

// FileNames are the names of every file the simulator writes into a folder:
// Write's tables and scenario file, and WriteImages's stack and plane.
func FileNames() []string {
	return []string{LandmarksFile, CellsFile, CandidatesFile, TruthCellsFile, TruthLandmarksFile, ScenarioFile, InVivoStackFile, EMPlaneFile}
}

// CheckFolder refuses to write the files names into dir when one of them is
// there already and dir is not a folder that the simulator wrote before (it
// holds a scenario.json of ferry's format). A user's own landmarks.csv,
// say, in the folder they name is never written over; a scenario written
// before is replaced, as a second run of demo into the same folder expects.
func CheckFolder(dir string, names ...string) error {
	var there []string
	for _, name := range names {
		if _, err := os.Lstat(filepath.Join(dir, name)); err == nil {
			there = append(there, name)
		}
	}
	if len(there) == 0 || isScenarioFolder(dir) {
		return nil
	}
	return fmt.Errorf("%s holds %s, which ferry did not write (the folder has no %s of a ferry scenario): refusing to write over them; name a new or empty folder",
		dir, strings.Join(there, ", "), ScenarioFile)
}

// isScenarioFolder reports whether dir holds a scenario file written by
// this package.
func isScenarioFolder(dir string) bool {
	data, err := os.ReadFile(filepath.Join(dir, ScenarioFile))
	if err != nil {
		return false
	}
	var head struct {
		Format    string `json:"format"`
		Generator string `json:"generator"`
	}
	if json.Unmarshal(data, &head) != nil {
		return false
	}
	return head.Format == ScenarioFormat
}
