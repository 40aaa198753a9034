package report

import (
	"fmt"

	"ferry/internal/remedy"
	"ferry/landmarks"
	"ferry/register"
	"ferry/register/match"
	"ferry/transform"
)

// FromTransform fills in the check, landmarks and transform of a report on
// a transform file: the check it keeps, drawn at the landmarks of the file
// it was fitted from, which must be the file at landmarkPath (by SHA-256).
// It adds the two files, as it read them, to in.Provenance.Inputs.
func FromTransform(in *Input, landmarkPath, transformPath string) error {
	file, err := register.ReadRegistrationFile(transformPath)
	if err != nil {
		return err
	}
	set, err := landmarks.ReadPairs(landmarkPath)
	if err != nil {
		return err
	}
	if file.Landmarks.SHA256 != "" && set.SHA256 != file.Landmarks.SHA256 {
		return remedy.Errorf("%s is not the landmark file %s was fitted from (sha256 %s, the transform names %s with sha256 %s): give that file, or leave out %s to check this one",
			landmarkPath, transformPath, short(set.SHA256), file.Landmarks.Path, short(file.Landmarks.SHA256), remedy.Ref{Input: remedy.TransformFile, Words: "the transform file"})
	}
	if file.Check == nil {
		return fmt.Errorf("%s holds no leave-one-out check: refit it with ferry fit", transformPath)
	}
	check := file.Check
	problem, err := register.PrepareLandmarks(set, file.Landmarks.Excluded, file.Voxels)
	if err != nil {
		return fmt.Errorf("%s: %w", transformPath, err)
	}
	at := make(map[string]int, problem.Len())
	for i, id := range problem.IDs {
		at[id] = i
	}
	in.Source = make([]transform.Vec, len(check.Landmarks))
	for k, l := range check.Landmarks {
		i, ok := at[l.ID]
		if !ok {
			return fmt.Errorf("%s: landmark %q of the check is not in %s", transformPath, l.ID, landmarkPath)
		}
		in.Source[k] = problem.Source[i]
	}
	in.LandmarkFile, in.TransformFile = landmarkPath, transformPath
	in.Check, in.Excluded, in.Transform = check, file.Landmarks.Excluded, file
	in.Provenance.Inputs = append(in.Provenance.Inputs, register.PairsInput(set), file.Input())
	return nil
}

// AddTables adds the tables of a report, either path empty when not given:
// the mapped cells (AddMapped) and the matches (AddMatches). It lists them
// in in.Provenance.Inputs by the SHA-256 of their bytes, before reading them.
func AddTables(in *Input, mappedPath, matchesPath string) error {
	var paths []string
	for _, p := range []string{mappedPath, matchesPath} {
		if p != "" {
			paths = append(paths, p)
		}
	}
	for _, p := range paths {
		sum, err := register.FileSHA256(p)
		if err != nil {
			return err
		}
		in.Provenance.Inputs = append(in.Provenance.Inputs, register.Input{Path: p, SHA256: sum})
	}
	if mappedPath != "" {
		if err := AddMapped(in, mappedPath); err != nil {
			return err
		}
	}
	if matchesPath != "" {
		return AddMatches(in, matchesPath)
	}
	return nil
}

// AddMapped reads a map output for the report (ReadMappedTable; without
// a sidecar or micrometre columns its positions are taken to be in the
// units of the transform's target side) and checks its dimension.
func AddMapped(in *Input, path string) error {
	m, err := register.ReadMappedTable(path, in.Transform.Voxels.Target)
	if err != nil {
		return err
	}
	if m.Dim != in.Check.Dim {
		return fmt.Errorf("%s: %d-D mapped cells for %d-D landmarks", path, m.Dim, in.Check.Dim)
	}
	in.Cells, in.CellsFile, in.CellsAssumed = m.Cells, path, m.Assumed
	return nil
}

// AddMatches reads a match output for the report.
func AddMatches(in *Input, path string) error {
	m, err := match.ReadMatchesTable(path)
	if err != nil {
		return err
	}
	in.Matches, in.MatchesFile = m, path
	return nil
}

func short(sum string) string {
	if len(sum) > 12 {
		return sum[:12] + "…"
	}
	return sum
}
