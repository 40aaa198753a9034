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

// Files written together appear together or not at all: a failure in the
// second fill leaves the first file as it was.
func TestWriteFilesTogether(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.csv"), filepath.Join(dir, "a.csv.json")
	if err := WriteBytes(context.Background(), a, []byte("old\n")); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("boom")
	err := WriteFiles(context.Background(),
		File{Path: a, Fill: func(w io.Writer) error { _, err := io.WriteString(w, "new\n"); return err }},
		File{Path: b, Fill: func(w io.Writer) error { return boom }})
	if !errors.Is(err, boom) {
		t.Fatalf("error %v, want boom", err)
	}
	if got, _ := os.ReadFile(a); string(got) != "old\n" {
		t.Errorf("first file changed to %q", got)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("folder holds %v", entries)
	}
	seen := ""
	if err := WriteFiles(context.Background(),
		File{Path: a, Fill: func(w io.Writer) error { seen = "new"; _, err := io.WriteString(w, "new\n"); return err }},
		File{Path: b, Fill: func(w io.Writer) error { _, err := io.WriteString(w, seen); return err }}); err != nil {
		t.Fatal(err)
	}
	if got, _ := os.ReadFile(b); string(got) != "new" {
		t.Errorf("second file %q: a later fill sees what an earlier one did", got)
	}
}

// WriteDir moves what fill made into the folder, replacing a folder of the
// same name, and leaves nothing behind on an error.
func TestWriteDir(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	fill := func(text string) func(string) error {
		return func(tmp string) error {
			if err := os.MkdirAll(filepath.Join(tmp, "store.zarr", "c"), 0o755); err != nil {
				return err
			}
			if err := os.WriteFile(filepath.Join(tmp, "store.zarr", "c", "0"), []byte(text), 0o644); err != nil {
				return err
			}
			return os.WriteFile(filepath.Join(tmp, "m.json"), []byte(text), 0o644)
		}
	}
	for _, text := range []string{"one", "two"} {
		if err := WriteDir(context.Background(), dir, fill(text)); err != nil {
			t.Fatal(err)
		}
		for _, f := range []string{"m.json", filepath.Join("store.zarr", "c", "0")} {
			if got, _ := os.ReadFile(filepath.Join(dir, f)); string(got) != text {
				t.Errorf("%s holds %q, want %q", f, got, text)
			}
		}
	}
	boom := errors.New("boom")
	if err := WriteDir(context.Background(), dir, func(tmp string) error {
		os.WriteFile(filepath.Join(tmp, "m.json"), []byte("three"), 0o644)
		return boom
	}); !errors.Is(err, boom) {
		t.Fatalf("error %v", err)
	}
	entries, _ := os.ReadDir(dir)
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	if strings.Join(names, ",") != "m.json,store.zarr" {
		t.Errorf("after a failed write the folder holds %v", names)
	}
	if got, _ := os.ReadFile(filepath.Join(dir, "m.json")); string(got) != "two" {
		t.Errorf("m.json changed to %q", got)
	}
}
