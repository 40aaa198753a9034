package outfile

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
)

// Write creates the file at path from what fill writes, whole or not at all.
// fill writes into a buffered temporary file in the same folder; only when
// fill returns nil, the data are synced and ctx is still live is the file
// renamed onto path. On any error, or when ctx is cancelled (an interrupt),
// the temporary file is removed and path is left as it was.
//
// A path that names something other than a regular file or a folder (a
// device such as /dev/null or /dev/full, a named pipe, a terminal, or
// /dev/stdout) is never replaced: the output is made in memory and, once
// whole, written into it as a stream (see IsStream). A link to a regular file
// is followed, and the file it names is replaced; the link stays a link.
//
// When ctx carries a Tracker (WithTracker), the temporary file is known to
// it until it is renamed or removed, so that a signal handler can remove it.
func Write(ctx context.Context, path string, fill func(w io.Writer) error) error {
	return WriteFiles(ctx, File{Path: path, Fill: fill})
}

// File is one output of WriteFiles: its final path and what fills it.
type File struct {
	Path string
	Fill func(w io.Writer) error
}

// WriteFiles writes several files that belong together (a table and its
// sidecar) whole or not at all, each as Write writes one. Each is filled, in
// order, into a temporary file beside its final name (or into memory, for a
// stream); only when every fill has succeeded, every file is synced and ctx
// is still live are they renamed into place (or written out), in order. A
// fill may rely on what an earlier fill saw (a checksum of the table, say).
// Should a rename fail (the folder vanished), the files already renamed are
// removed, so that no half of a set is left behind.
func WriteFiles(ctx context.Context, files ...File) (err error) {
	t := trackerFrom(ctx)
	targets := make([]string, len(files))
	streams := make([]bool, len(files))
	for i, f := range files {
		if targets[i], streams[i], err = resolve(f.Path); err != nil {
			return err
		}
	}
	tmps := make([]string, len(files))
	bufs := make([]*bytes.Buffer, len(files))
	defer func() {
		if err != nil {
			for _, tmp := range tmps {
				if tmp != "" {
					t.remove(tmp)
				}
			}
		}
	}()
	for i, f := range files {
		if streams[i] {
			bufs[i] = new(bytes.Buffer)
			if err := f.Fill(bufs[i]); err != nil {
				return fmt.Errorf("%s not written: %w", f.Path, err)
			}
			continue
		}
		tmp, err := prepare(t, targets[i], f.Path, f.Fill)
		tmps[i] = tmp
		if err != nil {
			return err
		}
	}
	if err := ctx.Err(); err != nil {
		return fmt.Errorf("%s not written: %w", files[0].Path, err)
	}
	for i, f := range files {
		if streams[i] {
			if err := writeStream(f.Path, bufs[i].Bytes()); err != nil {
				return err
			}
			continue
		}
		if err := t.rename(ctx, tmps[i], targets[i]); err != nil {
			for j := range i {
				if !streams[j] {
					os.Remove(targets[j])
				}
			}
			if ctx.Err() != nil {
				return fmt.Errorf("%s not written: %w", f.Path, err)
			}
			return fmt.Errorf("cannot write %s: %w", f.Path, unwrapPathError(err))
		}
		tmps[i] = ""
	}
	return nil
}

// prepare fills a synced temporary file, known to t, beside target (the
// regular file that path resolves to) and returns its name. On an error the
// name is still returned when the file exists, for the caller to remove.
func prepare(t *Tracker, target, path string, fill func(w io.Writer) error) (string, error) {
	dir := filepath.Dir(target)
	removeStale(dir)
	tmp, err := t.create(dir)
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

// WriteTo writes fill's output to w (standard output, say) whole or not at
// all: it is made in memory first, and w sees nothing when fill fails or ctx
// is cancelled. name is what messages call the output.
func WriteTo(ctx context.Context, w io.Writer, name string, fill func(w io.Writer) error) error {
	var buf bytes.Buffer
	if err := fill(&buf); err != nil {
		return fmt.Errorf("%s not written: %w", name, err)
	}
	if err := ctx.Err(); err != nil {
		return fmt.Errorf("%s not written: %w", name, err)
	}
	if _, err := w.Write(buf.Bytes()); err != nil {
		return fmt.Errorf("cannot write %s: %w", name, unwrapPathError(err))
	}
	return nil
}

// IsStream reports whether Write would write path as a stream: path exists
// and, links followed, is neither a regular file nor a folder.
func IsStream(path string) bool {
	_, stream, err := resolve(path)
	return err == nil && stream
}

// resolve says where Write puts path's data: the regular file to replace
// (a link's target, so that the link survives) or, when stream is true,
// path itself, to be opened and written into.
func resolve(path string) (target string, stream bool, err error) {
	info, err := os.Lstat(path)
	if errors.Is(err, fs.ErrNotExist) {
		return path, false, nil
	}
	if err != nil {
		return "", false, fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	if info.Mode()&fs.ModeSymlink != 0 {
		followed, err := os.Stat(path)
		switch {
		case errors.Is(err, fs.ErrNotExist):
			// A dangling link: nothing there to keep.
			return path, false, nil
		case err != nil:
			return "", false, fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
		}
		info = followed
		if info.Mode().IsRegular() {
			// /dev/stdout redirected to a file is a link through /proc:
			// renaming onto what it names would cut the file from the
			// shell's redirection (and lose what >> kept). Write it as a
			// stream.
			if throughProc(path) {
				return path, true, nil
			}
			real, err := filepath.EvalSymlinks(path)
			if err != nil {
				return path, true, nil
			}
			return real, false, nil
		}
	}
	switch {
	case info.IsDir():
		return "", false, fmt.Errorf("cannot write %s: is a folder", path)
	case info.Mode().IsRegular():
		return path, false, nil
	case info.Mode()&fs.ModeSocket != 0:
		return "", false, fmt.Errorf("cannot write %s: is a socket, not a file, device or pipe", path)
	default:
		return path, true, nil
	}
}

// throughProc reports whether path or a link on the way from it to a file
// goes through /proc or /dev/fd, whose links name open files, not paths.
func throughProc(path string) bool {
	p := path
	for range 40 {
		abs, err := filepath.Abs(p)
		if err != nil {
			return true
		}
		if abs == "/proc" || strings.HasPrefix(abs, "/proc/") || strings.HasPrefix(abs, "/dev/fd/") {
			return true
		}
		info, err := os.Lstat(abs)
		if err != nil || info.Mode()&fs.ModeSymlink == 0 {
			return false
		}
		next, err := os.Readlink(abs)
		if err != nil {
			return true
		}
		if !filepath.IsAbs(next) {
			next = filepath.Join(filepath.Dir(abs), next)
		}
		p = next
	}
	return true
}

// writeStream writes data, a whole output, into the device, pipe or
// terminal at path. It goes at the end of what is there (O_APPEND), so that
// /dev/stdout redirected with >> to a file keeps what the file held.
func writeStream(path string, data []byte) error {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		return fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	if _, err := f.Write(data); err != nil {
		f.Close()
		return fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("cannot write %s: %w", path, unwrapPathError(err))
	}
	return nil
}

// NotAnInput returns an error when out names the same file as one of the
// inputs, by path or, where both exist, by identity (a link or another
// spelling of the same path). ferry never writes over its own input. A
// device or pipe (a terminal, /dev/null) may be read and written in the
// same run, so only regular files are compared by identity.
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
		if outErr != nil || !outInfo.Mode().IsRegular() {
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
	tmp, err := os.MkdirTemp(dir, tempPrefix+"dir-*")
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
