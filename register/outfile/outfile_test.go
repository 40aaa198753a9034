package outfile

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
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
