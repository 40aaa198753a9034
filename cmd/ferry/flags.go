package main

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"ferry/imaging"
	"ferry/internal/remedy"
	"ferry/landmarks"
	"ferry/outfile"
	"ferry/progress"
	"ferry/register"
	"ferry/transform"
)

// modelFlags are the flags that fit, check and suggest share.
type modelFlags struct {
	model, smoothing, exclude string
	keepFlagged               bool
	sourceVoxel, targetVoxel  string
	sourceSD, targetSD        string
	noMirror                  bool
	// addPairs, when set, adds pairs to the landmark set once it is read
	// and before it is prepared (fit --decisions).
	addPairs func(set *landmarks.PairSet) error
}

func (f *modelFlags) register(cmd *cobra.Command) {
	fl := cmd.Flags()
	fl.StringVar(&f.model, "model", "auto", "transform model: auto, translation, rigid, similarity, affine or tps")
	fl.StringVar(&f.smoothing, "smoothing", "auto", "thin-plate-spline smoothing S: a number ≥ 0 (0 interpolates) or auto")
	fl.StringVar(&f.exclude, "exclude", "", "landmark ids to leave out, comma-separated")
	fl.StringVar(&f.sourceVoxel, "source-voxel", "", "source voxel size X,Y,Z in µm: landmark source coordinates are voxel indices")
	fl.StringVar(&f.targetVoxel, "target-voxel", "", "target voxel size X,Y,Z in µm: landmark target coordinates are voxel indices")
	fl.StringVar(&f.sourceSD, "source-sd", "", "localisation error of the source picks X,Y,Z in µm (one standard deviation); default: estimated")
	fl.StringVar(&f.targetSD, "target-sd", "", "localisation error of the target picks X,Y,Z in µm (one standard deviation); default: estimated")
	fl.BoolVar(&f.noMirror, "no-mirror", false, "forbid rigid and similarity fits from mirroring")
}

// landmarkJob is a landmark file read and the flags parsed against it.
type landmarkJob struct {
	set      *landmarks.PairSet
	problem  *register.Problem
	settings register.Settings
	voxels   register.Voxels
	exclude  []string
}

// load parses the flags, reads the landmark file and prepares the problem.
// Per-axis flags take as many numbers as the file has dimensions, so they
// are checked once the file is read.
func (f *modelFlags) load(path string) (*landmarkJob, error) {
	var job landmarkJob
	var err error
	if job.settings.Model, err = register.ParseModel(f.model); err != nil {
		return nil, fmt.Errorf("--model: %w", err)
	}
	if job.settings.Smoothing, err = register.ParseSmoothing(f.smoothing); err != nil {
		return nil, fmt.Errorf("--smoothing: %w", err)
	}
	if job.exclude, err = landmarks.ParseIDList("--exclude", f.exclude); err != nil {
		return nil, err
	}
	job.settings.NoMirror = f.noMirror
	if job.set, err = landmarks.ReadPairs(path); err != nil {
		return nil, err
	}
	if f.addPairs != nil {
		if err := f.addPairs(job.set); err != nil {
			return nil, err
		}
	}
	dim := job.set.Dim
	for _, t := range []struct {
		name, value string
		dst         **transform.Vec
	}{
		{"--source-voxel", f.sourceVoxel, &job.voxels.Source},
		{"--target-voxel", f.targetVoxel, &job.voxels.Target},
		{"--source-sd", f.sourceSD, &job.settings.SourceSD},
		{"--target-sd", f.targetSD, &job.settings.TargetSD},
	} {
		if t.value == "" {
			continue
		}
		v, err := landmarks.ParseTriple(t.name, t.value, dim)
		if err != nil {
			return nil, err
		}
		if dim == 2 && strings.HasSuffix(t.name, "voxel") {
			// A 2-D plane still has a thickness along z for images, and
			// the transform file wants every voxel size positive.
			v[2] = 1
		}
		*t.dst = &v
	}
	if job.problem, err = register.PrepareLandmarks(job.set, job.exclude, job.voxels); err != nil {
		return nil, excludeFlag(err)
	}
	return &job, nil
}

// registerKeep adds --keep-flagged, for the commands that fit.
func (f *modelFlags) registerKeep(cmd *cobra.Command) {
	cmd.Flags().BoolVar(&f.keepFlagged, "keep-flagged", false, "keep the landmarks the check flags in the fit (by default they are left out)")
}

// assessForFit loads the landmark file and checks it as fit does: the
// flagged landmarks left out unless --keep-flagged, and said so on w.
func (f *modelFlags) assessForFit(cmd *cobra.Command, path string, w io.Writer) (*landmarkJob, *register.Assessment, error) {
	job, err := f.load(path)
	if err != nil {
		return nil, nil, err
	}
	settings, err := sizedSettings(cmd, path, job)
	if err != nil {
		return nil, nil, err
	}
	fj, err := register.CheckAndFit(cmd.Context(), job.set, job.exclude, job.voxels, settings, f.keepFlagged)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", path, pairFlags(err))
	}
	job.problem, job.exclude = fj.Problem, fj.Exclude
	if len(fj.LeftOut) > 0 {
		fmt.Fprintf(w, "Left out %d landmark(s) that look wrong (keep them with --keep-flagged):\n", len(fj.LeftOut))
		for _, l := range fj.LeftOut {
			fmt.Fprintf(w, "  %s (%s): %s\n", l.ID, l.Kind, l.Flag)
		}
	}
	return job, fj.Assessment, nil
}

// sizedSettings are the job's settings with progress on the terminal, once
// the job is known to fit the machine: one that needs more memory than the
// machine has is refused before it starts, and one that takes long is
// announced on stderr, with the way to make it smaller.
func sizedSettings(cmd *cobra.Command, path string, job *landmarkJob) (register.Settings, error) {
	est := register.EstimateJob(job.problem, job.settings)
	if err := est.CheckMemory(register.AvailableMemory()); err != nil {
		return register.Settings{}, fmt.Errorf("%s: %w", path, err)
	}
	if est.Announce() {
		fmt.Fprintf(cmd.ErrOrStderr(), "ferry: %s: %s; Ctrl-C stops it. To make it smaller: %s.\n", path, est.Describe().Named(flagName), est.WayOut().Named(flagName))
	}
	settings := job.settings
	settings.Progress = progress.Terminal(os.Stderr)
	return settings, nil
}

// assess loads the landmark file with the flags and runs the check on it,
// once the job is known to fit the machine (sizedSettings).
func (f *modelFlags) assess(cmd *cobra.Command, path string) (*landmarkJob, *register.Assessment, error) {
	job, err := f.load(path)
	if err != nil {
		return nil, nil, err
	}
	settings, err := sizedSettings(cmd, path, job)
	if err != nil {
		return nil, nil, err
	}
	a, err := register.AssessContext(cmd.Context(), job.problem, settings)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", path, pairFlags(err))
	}
	return job, a, nil
}

// mappingJob is register's mapping job with the cells' own localisation
// error (--cell-sd).
type mappingJob struct {
	*register.MappingJob
	cellSD *transform.Vec
}

// loadMapping reads a transform file and a cells file (in the target when
// inverse) and prepares their mapping, for map, match and review: --cell-sd
// is checked against the cells before the mapper is built.
func loadMapping(transformPath, cellsPath, cellSD string, inverse bool) (*mappingJob, error) {
	j, err := register.LoadMapping(transformPath, cellsPath, inverse)
	if err != nil {
		return nil, err
	}
	sd, err := optionalTriple("--cell-sd", cellSD, j.Cells.Dim)
	if err != nil {
		return nil, err
	}
	if err := j.Prepare(); err != nil {
		return nil, err
	}
	return &mappingJob{MappingJob: j, cellSD: sd}, nil
}

// setFlags lists the flags the user set, as given, for provenance.
func setFlags(cmd *cobra.Command) []string {
	var out []string
	cmd.Flags().Visit(func(f *pflag.Flag) {
		out = append(out, fmt.Sprintf("--%s=%s", f.Name, f.Value.String()))
	})
	return out
}

// inputsOf hashes input files for provenance.
func inputsOf(paths ...string) ([]register.Input, error) {
	var in []register.Input
	for _, p := range paths {
		sum, err := register.FileSHA256(p)
		if err != nil {
			return nil, err
		}
		in = append(in, register.Input{Path: p, SHA256: sum})
	}
	return in, nil
}

// stackInput records an image stack as an input: a file by its SHA-256, a
// folder of planes by the SHA-256 of its plane files' bytes one after the
// other in the stack's page order.
func stackInput(path string) (register.Input, error) {
	files, err := imaging.StackFiles(path)
	if err != nil {
		return register.Input{}, err
	}
	h := sha256.New()
	for _, name := range files {
		if err := copyFile(h, name); err != nil {
			return register.Input{}, fmt.Errorf("cannot read %s: %w", name, err)
		}
	}
	return register.Input{Path: path, SHA256: hex.EncodeToString(h.Sum(nil))}, nil
}

func copyFile(w io.Writer, path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	_, err = io.Copy(w, f)
	return err
}

// requireOutput checks the -o flag: given, and not one of the inputs.
func requireOutput(out string, inputs ...string) error {
	if strings.TrimSpace(out) == "" {
		return fmt.Errorf("-o: an output file is required")
	}
	if out == stdoutName {
		return nil
	}
	if info, err := os.Stat(out); err == nil && info.IsDir() {
		return fmt.Errorf("-o %s: is a folder, want a file name", out)
	}
	return outfile.NotAnInput(out, inputs...)
}

// decimalFlag is a number flag read by the tables' rule
// (landmarks.ParseDecimal): the flag library's own reading also takes Go's
// digit separators (1_0) and hexadecimal, which no number in a table may be.
type decimalFlag float64

func newDecimalFlag(fl *pflag.FlagSet, p *float64, name string, value float64, usage string) {
	*p = value
	fl.Var((*decimalFlag)(p), name, usage)
}

func (d *decimalFlag) String() string { return strconv.FormatFloat(float64(*d), 'g', -1, 64) }
func (d *decimalFlag) Type() string   { return "float" }
func (d *decimalFlag) Set(s string) error {
	v, err := landmarks.ParseDecimal(s)
	if err != nil {
		return err
	}
	*d = decimalFlag(v)
	return nil
}

// flagName is the flag that gives an input a library message asks to
// change: the one place where the library's inputs meet the flags' names.
func flagName(in remedy.Input) string {
	switch in {
	case remedy.OutputVoxel:
		return "--voxel"
	case remedy.OutputBox:
		return "--bounds"
	case remedy.MemoryLimit:
		return "--memory-gib"
	case remedy.TargetPage:
		return "--target-z"
	case remedy.TargetVoxel:
		return "--target-voxel"
	case remedy.GridSpacing:
		return "--spacing"
	case remedy.GridMargin:
		return "--margin"
	case remedy.TransformFile:
		return "--transform"
	case remedy.Smoothing:
		return "--smoothing"
	case remedy.Model:
		return "--model"
	}
	return ""
}

// excludeFlag names the flag --exclude in an error about the ids left out.
func excludeFlag(err error) error {
	if errors.Is(err, landmarks.ErrExclusion) {
		return fmt.Errorf("--exclude: %w", err)
	}
	return err
}

// pairFlags adds to the error about one landmark pair the flags that act
// on it: --exclude with its id, and --model affine where that would fit.
func pairFlags(err error) error {
	var pe *register.PairError
	if !errors.As(err, &pe) {
		return err
	}
	if pe.Affine {
		return fmt.Errorf("%w (--exclude %s, or --model affine)", err, pe.ID)
	}
	return fmt.Errorf("%w (--exclude %s)", err, pe.ID)
}
