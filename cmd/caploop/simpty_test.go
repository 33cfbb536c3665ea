package main

import (
	"bufio"
	"os/exec"
	"strings"
	"testing"
)

// servePTY starts `caploop sim --pty` with args for the rest of the test and returns the
// device paths it prints (one a board); its log is shown when the test fails.
func servePTY(t *testing.T, bin string, boards int, args ...string) []string {
	t.Helper()
	sim := exec.Command(bin, append([]string{"sim", "--pty"}, args...)...)
	stdout, err := sim.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var log strings.Builder
	sim.Stderr = &log
	if err := sim.Start(); err != nil {
		t.Fatalf("start sim: %v", err)
	}
	t.Cleanup(func() {
		sim.Process.Kill()
		sim.Wait()
		if t.Failed() {
			t.Logf("sim %v log:\n%s", args, log.String())
		}
	})
	rd := bufio.NewReader(stdout)
	var paths []string
	for i := 0; i < boards; i++ {
		p, err := rd.ReadString('\n')
		if err != nil {
			t.Fatalf("sim %v printed %d of %d paths: %v", args, i, boards, err)
		}
		paths = append(paths, strings.TrimSpace(p))
	}
	return paths
}
