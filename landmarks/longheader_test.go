package landmarks

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestLongHeaderShortMessage: a one-line header of 10 MB made a 10 MB error
// message, the header echoed whole. The message now stays short and still
// names the file, the line and the column.
func TestLongHeaderShortMessage(t *testing.T) {
	var many strings.Builder
	for i := 0; many.Len() < 10<<20; i++ {
		many.WriteString("col" + strconv.Itoa(i) + ",")
	}
	huge := strings.Repeat("h", 10<<20)
	for _, tc := range []struct {
		name, header, want string
	}{
		{"a million columns", many.String() + "x", `column "id": missing`},
		{"one 10 MB name", huge, `column "id": missing`},
		{"a 10 MB name twice", "id,x,y,z," + huge + "," + huge, "named twice"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "cells.csv")
			if err := os.WriteFile(path, []byte(tc.header+"\nc1,1,2,3\n"), 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := ReadPoints(path, "cells")
			if err == nil {
				t.Fatal("accepted")
			}
			msg := err.Error()
			if len(msg) > 500 || !strings.Contains(msg, "cells.csv:1:") || !strings.Contains(msg, tc.want) {
				t.Errorf("message of %d bytes: %.300s", len(msg), msg)
			}
		})
	}
}
