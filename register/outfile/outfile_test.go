package outfile

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestWriteWholeOrNothing(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.csv")
	if err := WriteBytes(context.Background(), path, []byte("first\n")); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("boom")
	tests := []struct {
		name string
		ctx  func() context.Context
		fill func(w io.Writer) error
	}{
		{"fill fails half way", context.Background, func(w io.Writer) error {
			io.WriteString(w, "half")
			return boom
		}},
		{"interrupted", func() context.Context {
			ctx, cancel := context.WithCancel(context.Background())
			cancel()
			return ctx
		}, func(w io.Writer) error {
			_, err := io.WriteString(w, "second\n")
			return err
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if err := Write(tc.ctx(), path, tc.fill); err == nil {
				t.Fatal("Write succeeded, want an error")
			}
			got, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if string(got) != "first\n" {
				t.Errorf("earlier output changed to %q", got)
			}
			entries, _ := os.ReadDir(dir)
			if len(entries) != 1 {
				t.Errorf("folder holds %d files, want only the output: %v", len(entries), entries)
			}
		})
	}
	info, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if info.Mode().Perm() != 0o644 {
		t.Errorf("mode %v, want 0644", info.Mode().Perm())
	}
}

func TestNotAnInput(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "cells.csv")
	if err := os.WriteFile(in, []byte("id,x,y,z\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "link.csv")
	if err := os.Symlink(in, link); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		out     string
		wantErr bool
	}{
		{in, true},
		{filepath.Join(dir, ".", "cells.csv"), true},
		{link, true},
		{filepath.Join(dir, "mapped.csv"), false},
	}
	for _, tc := range tests {
		err := NotAnInput(tc.out, "", in)
		if (err != nil) != tc.wantErr {
			t.Errorf("NotAnInput(%s) = %v, want error %v", tc.out, err, tc.wantErr)
		}
	}
}

func TestWriteErrorsNameThePath(t *testing.T) {
	dir := t.TempDir()
	folder := filepath.Join(dir, "sub")
	if err := os.Mkdir(folder, 0o755); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("boom")
	tests := []struct {
		name, path string
		fill       func(w io.Writer) error
		want       string
	}{
		{"over a folder", folder, func(io.Writer) error { return nil }, "is a folder"},
		{"fill fails", filepath.Join(dir, "out.csv"), func(io.Writer) error { return boom }, "boom"},
		{"missing folder", filepath.Join(dir, "no", "out.csv"), func(io.Writer) error { return nil }, "no such file"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := Write(context.Background(), tc.path, tc.fill)
			if err == nil {
				t.Fatal("Write succeeded, want an error")
			}
			if msg := err.Error(); !strings.Contains(msg, tc.path) || !strings.Contains(msg, tc.want) {
				t.Errorf("error %q: want one naming %s and saying %q", msg, tc.path, tc.want)
			}
		})
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("folder holds %v, want only sub", entries)
	}
}
