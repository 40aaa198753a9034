package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"testing"
	"time"
)

// reviewArgs are the arguments of a review of the small scenario: its
// matches, with the EM section as a one-page target stack at its depth.
func reviewArgs(t *testing.T) ([]string, string) {
	t.Helper()
	sc := newScenarioFixture(t)
	dir := filepath.Dir(sc.transform)
	matches := filepath.Join(dir, "matches.csv")
	mustSucceed(t, "match", sc.transform, sc.files.Cells, sc.files.Candidates, "-o", matches)
	decisions := filepath.Join(dir, "decisions.csv")
	z := float64(sc.ip.TargetZ) * sc.ip.TargetVoxelUM[2]
	return []string{"review", matches, "--transform", sc.transform, "--cells", sc.files.Cells, "--candidates", sc.files.Candidates,
		"--source-stack", sc.stack, "--source-voxel", sc.sourceVox, "--target-stack", sc.plane, "--target-voxel", sc.tgVox,
		"--target-offset", fmt.Sprintf("0,0,%g", z), "--decisions", decisions}, decisions
}

func TestReviewInputErrors(t *testing.T) {
	args, _ := reviewArgs(t)
	without := func(flag string) []string {
		var out []string
		for i := 0; i < len(args); i++ {
			if args[i] == flag {
				i++
				continue
			}
			out = append(out, args[i])
		}
		return out
	}
	with := func(flag, value string) []string {
		out := append([]string(nil), args...)
		for i := range out {
			if out[i] == flag {
				out[i+1] = value
			}
		}
		return out
	}
	// A port that is taken.
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	for _, tc := range []struct {
		args []string
		want []string
	}{
		{without("--transform"), []string{"--transform is required"}},
		{without("--target-stack"), []string{"--target-stack is required"}},
		{append([]string{"review", args[5]}, args[2:]...), []string{"cells.csv", `column "candidate": missing`}},
		{with("--target-offset", "1,2"), []string{"--target-offset"}},
		{with("--source-stack", "/no/such/stack.tif"), []string{"/no/such/stack.tif"}},
		{append(append([]string(nil), args...), "--listen", ln.Addr().String()), []string{ln.Addr().String(), "in use"}},
		{with("--cells", writeFile(t, filepath.Join(t.TempDir(), "other.csv"), "id,x,y,z\nx1,100,100,100\n")), []string{"matches.csv", "is not in", "other.csv"}},
	} {
		o := ferry(t, tc.args...)
		oneLine(t, o, tc.want...)
	}
}

// Ctrl-C stops the server cleanly: exit 0, the decisions made saved.
func TestReviewStopsOnInterrupt(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("SIGINT cannot be sent to a process on Windows")
	}
	args, decisions := reviewArgs(t)
	cmd := exec.Command(ferryBinary(t), append(args, "--listen", "127.0.0.1:0")...)
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var stderr strings.Builder
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	lines := bufio.NewScanner(stdout)
	if !lines.Scan() {
		t.Fatalf("no address printed; stderr %s", stderr.String())
	}
	addr := regexp.MustCompile(`http://[0-9.:]+/`).FindString(lines.Text())
	if addr == "" {
		t.Fatalf("no address in %q", lines.Text())
	}
	state, err := http.Get(addr + "api/state")
	if err != nil {
		t.Fatal(err)
	}
	var first struct{ Order []string }
	decodeJSON(t, state, &first)
	resp, err := http.Post(addr+"api/decide", "application/json", strings.NewReader(`{"id":"`+first.Order[0]+`","decision":"none"}`))
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("decide: %s", resp.Status)
	}
	if err := cmd.Process.Signal(os.Interrupt); err != nil {
		t.Fatal(err)
	}
	var rest []string
	for lines.Scan() {
		rest = append(rest, lines.Text())
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("exit: %v; stderr %s", err, stderr.String())
		}
	case <-time.After(20 * time.Second):
		t.Fatal("review did not stop on SIGINT")
	}
	if len(rest) != 1 || !strings.Contains(rest[0], "Stopped. 1 of") {
		t.Errorf("after the interrupt: %q", rest)
	}
	data, err := os.ReadFile(decisions)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(data), first.Order[0]+",,none,") {
		t.Errorf("decisions file:\n%s", data)
	}
}

func decodeJSON(t *testing.T, r *http.Response, v any) {
	t.Helper()
	defer r.Body.Close()
	if err := json.NewDecoder(r.Body).Decode(v); err != nil {
		t.Fatal(err)
	}
}
