package outfile

import (
	"context"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestWriteNeverReplacesADevice is the regression test of a probe's
// finding: -o /dev/null, /dev/full or /dev/stdout was renamed over, turning
// the device into a regular file, and /dev/full gave no disk-full error.
// Devices, pipes and links through /proc are now written as streams and stay
// what they were.
func TestWriteNeverReplacesADevice(t *testing.T) {
	if runtime.GOOS != "linux" {
		t.Skip("needs /dev/null, /dev/full and /proc")
	}
	data := "a,b\n1,2\n"
	tests := []struct {
		name    string
		path    func(t *testing.T) (path string, read func() string)
		wantErr string
	}{
		{"/dev/null", func(t *testing.T) (string, func() string) { return "/dev/null", nil }, ""},
		{"/dev/full", func(t *testing.T) (string, func() string) { return "/dev/full", nil }, "no space left on device"},
		{"a named pipe", func(t *testing.T) (string, func() string) {
			p := filepath.Join(t.TempDir(), "fifo")
			if err := syscall.Mkfifo(p, 0o600); err != nil {
				t.Skip(err)
			}
			got := make(chan string, 1)
			go func() {
				f, err := os.Open(p)
				if err != nil {
					got <- err.Error()
					return
				}
				b, _ := io.ReadAll(f)
				f.Close()
				got <- string(b)
			}()
			return p, func() string {
				select {
				case s := <-got:
					return s
				case <-time.After(5 * time.Second):
					return "nothing read"
				}
			}
		}, ""},
		{"a link through /proc to a pipe, as /dev/stdout is", func(t *testing.T) (string, func() string) {
			r, w, err := os.Pipe()
			if err != nil {
				t.Fatal(err)
			}
			t.Cleanup(func() { r.Close(); w.Close() })
			link := filepath.Join(t.TempDir(), "stdout")
			if err := os.Symlink(fmt.Sprintf("/proc/self/fd/%d", w.Fd()), link); err != nil {
				t.Fatal(err)
			}
			return link, func() string {
				w.Close()
				b, _ := io.ReadAll(r)
				return string(b)
			}
		}, ""},
		{"a link through /proc to a regular file, as a redirected /dev/stdout is", func(t *testing.T) (string, func() string) {
			dir := t.TempDir()
			f, err := os.Create(filepath.Join(dir, "redirected"))
			if err != nil {
				t.Fatal(err)
			}
			t.Cleanup(func() { f.Close() })
			link := filepath.Join(dir, "stdout")
			if err := os.Symlink(fmt.Sprintf("/proc/self/fd/%d", f.Fd()), link); err != nil {
				t.Fatal(err)
			}
			return link, func() string {
				b, _ := os.ReadFile(f.Name())
				return string(b)
			}
		}, ""},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path, read := tc.path(t)
			before, err := os.Lstat(path)
			if err != nil {
				t.Fatal(err)
			}
			if !IsStream(path) {
				t.Errorf("IsStream(%s) = false", path)
			}
			err = WriteBytes(context.Background(), path, []byte(data))
			switch {
			case tc.wantErr == "" && err != nil:
				t.Fatalf("Write: %v", err)
			case tc.wantErr != "" && (err == nil || !strings.Contains(err.Error(), tc.wantErr)):
				t.Fatalf("Write: got %v, want an error saying %q", err, tc.wantErr)
			}
			after, err := os.Lstat(path)
			if err != nil {
				t.Fatal(err)
			}
			if after.Mode().Type() != before.Mode().Type() {
				t.Errorf("%s changed from %v to %v", path, before.Mode().Type(), after.Mode().Type())
			}
			if read != nil {
				if got := read(); got != data {
					t.Errorf("read %q, want %q", got, data)
				}
			}
			for _, dir := range []string{filepath.Dir(path), "/dev"} {
				entries, _ := os.ReadDir(dir)
				for _, e := range entries {
					if strings.HasPrefix(e.Name(), tempPrefix) {
						t.Errorf("temporary file %s left in %s", e.Name(), dir)
					}
				}
			}
		})
	}
}

// TestWriteStreamWholeOrNothing: a stream gets nothing when fill fails.
func TestWriteStreamWholeOrNothing(t *testing.T) {
	r, w, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	link := filepath.Join(t.TempDir(), "pipe")
	if err := os.Symlink(fmt.Sprintf("/proc/self/fd/%d", w.Fd()), link); err != nil {
		t.Fatal(err)
	}
	err = Write(context.Background(), link, func(w io.Writer) error {
		io.WriteString(w, "half")
		return fmt.Errorf("boom")
	})
	if err == nil {
		t.Fatal("Write succeeded, want an error")
	}
	w.Close()
	if b, _ := io.ReadAll(r); len(b) != 0 {
		t.Errorf("the stream got %q", b)
	}
}

// TestWriteThroughALink: a link to a regular file stays a link, and the file
// it names gets the output whole.
func TestWriteThroughALink(t *testing.T) {
	dir := t.TempDir()
	real := filepath.Join(dir, "real.csv")
	if err := os.WriteFile(real, []byte("old\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "link.csv")
	if err := os.Symlink("real.csv", link); err != nil {
		t.Fatal(err)
	}
	if err := WriteBytes(context.Background(), link, []byte("new\n")); err != nil {
		t.Fatal(err)
	}
	info, err := os.Lstat(link)
	if err != nil || info.Mode()&fs.ModeSymlink == 0 {
		t.Errorf("the link was replaced: %v %v", info.Mode(), err)
	}
	if b, _ := os.ReadFile(real); string(b) != "new\n" {
		t.Errorf("the file linked to holds %q", b)
	}
}

// TestWriteRefusesASocket: a socket cannot be opened for writing.
func TestWriteRefusesASocket(t *testing.T) {
	dir, err := os.MkdirTemp("", "sock")
	if err != nil {
		t.Fatal(err)
	}
	defer os.RemoveAll(dir)
	p := filepath.Join(dir, "s")
	fd, err := syscall.Socket(syscall.AF_UNIX, syscall.SOCK_STREAM, 0)
	if err != nil {
		t.Skip(err)
	}
	defer syscall.Close(fd)
	if err := syscall.Bind(fd, &syscall.SockaddrUnix{Name: p}); err != nil {
		t.Skip(err)
	}
	err = WriteBytes(context.Background(), p, []byte("x"))
	if err == nil || !strings.Contains(err.Error(), "socket") {
		t.Errorf("got %v, want a refusal naming the socket", err)
	}
	if info, err := os.Lstat(p); err != nil || info.Mode()&fs.ModeSocket == 0 {
		t.Errorf("the socket was replaced")
	}
}
