package outfile

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// tempPattern marks ferry's temporary files, so that a user who finds one
// after a power cut knows where it came from.
const tempPattern = ".ferry-partial-*"

// Write creates the file at path from what fill writes, whole or not at all.
// fill writes into a buffered temporary file in the same folder; only when
// fill returns nil, the data are synced and ctx is still live is the file
// renamed onto path. On any error, or when ctx is cancelled (an interrupt),
// the temporary file is removed and path is left as it was.
func Write(ctx context.Context, path string, fill func(w io.Writer) error) error {
	return WriteFiles(ctx, File{Path: path, Fill: fill})
}

// File is one output of WriteFiles: its final path and what fills it.
type File struct {
	Path string
	Fill func(w io.Writer) error
}

// WriteFiles writes several files that belong together (a table and its
// sidecar) whole or not at all. Each is filled, in order, into a temporary
// file beside its final name; only when every fill has succeeded, every file
// is synced and ctx is still live are they renamed into place, in order. A
// fill may rely on what an earlier fill saw (a checksum of the table, say).
// Should a rename fail (the folder vanished), the files already renamed are
// removed, so that no half of a set is left behind.
func WriteFiles(ctx context.Context, files ...File) (err error) {
	tmps := make([]string, 0, len(files))
	defer func() {
		if err != nil {
			for _, t := range tmps {
				os.Remove(t)
			}
		}
	}()
	for _, f := range files {
		tmp, err := prepare(f.Path, f.Fill)
		if tmp != "" {
			tmps = append(tmps, tmp)
		}
		if err != nil {
			return err
		}
	}
	if err := ctx.Err(); err != nil {
		return fmt.Errorf("%s not written: %w", files[0].Path, err)
	}
	for i, f := range files {
		if err := os.Rename(tmps[i], f.Path); err != nil {
			for _, done := range files[:i] {
				os.Remove(done.Path)
			}
			return fmt.Errorf("cannot write %s: %w", f.Path, unwrapPathError(err))
		}
	}
	return nil
}

// prepare fills a synced temporary file beside path and returns its name.
// On an error the name is still returned when the file exists, for the
// caller to remove.
func prepare(path string, fill func(w io.Writer) error) (string, error) {
	if info, err := os.Stat(path); err == nil && info.IsDir() {
		return "", fmt.Errorf("cannot write %s: is a folder", path)
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), tempPattern)
	if err != nil {
		return "", fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	name := tmp.Name()
	buf := bufio.NewWriterSize(tmp, 1<<16)
	if err := fill(buf); err != nil {
		tmp.Close()
		return name, fmt.Errorf("%s not written: %w", path, err)
	}
	if err := buf.Flush(); err != nil {
		tmp.Close()
		return name, fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return name, fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	if err := tmp.Close(); err != nil {
		return name, fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	// A temporary file is created 0600; an output should read like any
	// other file the user makes.
	if err := os.Chmod(name, 0o644); err != nil {
		return name, fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	return name, nil
}

// WriteBytes is Write for data already in memory.
func WriteBytes(ctx context.Context, path string, data []byte) error {
	return Write(ctx, path, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

// NotAnInput returns an error when out names the same file as one of the
// inputs, by path or, where both exist, by identity (a link or another
// spelling of the same path). ferry never writes over its own input.
func NotAnInput(out string, inputs ...string) error {
	absOut, err := filepath.Abs(out)
	if err != nil {
		return fmt.Errorf("output %s: %w", out, err)
	}
	outInfo, outErr := os.Stat(out)
	for _, in := range inputs {
		if in == "" {
			continue
		}
		absIn, err := filepath.Abs(in)
		if err == nil && absIn == absOut {
			return fmt.Errorf("output %s is also an input: refusing to write over it", out)
		}
		if outErr != nil {
			continue
		}
		if inInfo, err := os.Stat(in); err == nil && os.SameFile(inInfo, outInfo) {
			return fmt.Errorf("output %s is the same file as input %s: refusing to write over it", out, in)
		}
	}
	return nil
}

// unwrapPathError drops the temporary name from an *os.PathError, which
// would only confuse a user who never asked for that file.
func unwrapPathError(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// WriteDir fills a fresh temporary folder inside dir (created if need be)
// and, when fill returns nil and ctx is still live, moves each entry of it
// into dir, replacing an entry of the same name (a file, or a folder such
// as a Zarr store). Each entry appears whole or not at all; on an error
// nothing of the temporary folder is left behind.
func WriteDir(ctx context.Context, dir string, fill func(tmp string) error) (err error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("cannot write into %s: %w", dir, unwrapPathError(err))
	}
	tmp, err := os.MkdirTemp(dir, tempPattern)
	if err != nil {
		return fmt.Errorf("cannot write into %s: %w", dir, unwrapPathError(err))
	}
	defer os.RemoveAll(tmp)
	if err := fill(tmp); err != nil {
		return fmt.Errorf("%s not written: %w", dir, err)
	}
	if err := ctx.Err(); err != nil {
		return fmt.Errorf("%s not written: %w", dir, err)
	}
	entries, err := os.ReadDir(tmp)
	if err != nil {
		return fmt.Errorf("cannot write into %s: %w", dir, unwrapPathError(err))
	}
	for _, e := range entries {
		from, to := filepath.Join(tmp, e.Name()), filepath.Join(dir, e.Name())
		if e.IsDir() {
			if err := os.Chmod(from, 0o755); err != nil {
				return fmt.Errorf("cannot write %s: %w", to, unwrapPathError(err))
			}
			// A folder cannot be renamed over another: move the old one
			// into the temporary folder, which is removed at the end.
			if _, err := os.Stat(to); err == nil {
				if err := os.Rename(to, filepath.Join(tmp, ".old-"+e.Name())); err != nil {
					return fmt.Errorf("cannot replace %s: %w", to, unwrapPathError(err))
				}
			}
		}
		if err := os.Rename(from, to); err != nil {
			return fmt.Errorf("cannot write %s: %w", to, unwrapPathError(err))
		}
	}
	return nil
}
