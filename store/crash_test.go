package store

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// crashChildEnv, when set to a data folder, turns the test binary into the
// crash test's child: it Puts in a loop until it is killed.
const crashChildEnv = "DWIAUDIT_STORE_CRASH_CHILD_DIR"

func TestMain(m *testing.M) {
	if dir := os.Getenv(crashChildEnv); dir != "" {
		os.Exit(crashChild(dir))
	}
	os.Exit(m.Run())
}

// crashChild Puts from four goroutines and prints "ok <SOP UID> <sha256>"
// after each Put returns; the parent kills it with SIGKILL at some point.
// It stops by itself after a while in case the parent is gone.
func crashChild(dir string) int {
	opts := testOptions(dir)
	opts.Now = time.Now
	s, err := Open(opts)
	if err != nil {
		fmt.Fprintln(os.Stderr, "child Open:", err)
		return 1
	}
	out := make(chan string, 64)
	for w := range 4 {
		go func() {
			for i := 0; ; i++ {
				ti := testInstance{SOP: uid(90, w, i), Series: uid(90, w), InstanceNumber: i, Payload: 96<<10 + i%7*4096, Seed: byte(i)}
				if _, err := s.Put(context.Background(), ti.request(), bytes.NewReader(ti.dataSet())); err != nil {
					fmt.Fprintln(os.Stderr, "child Put:", err)
					os.Exit(1)
				}
				out <- "ok " + ti.SOP + " " + ti.sha()
			}
		}()
	}
	deadline := time.After(time.Minute)
	for {
		select {
		case line := <-out:
			os.Stdout.WriteString(line + "\n") // one write(2): seen by the parent even if killed next
		case <-deadline:
			return 2
		}
	}
}

func TestCrashKeepsEveryAnsweredPut(t *testing.T) {
	const answered = 60 // Puts to see answered before the kill
	dir := t.TempDir()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), crashChildEnv+"="+dir)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cmd.Process.Kill() }) // if the test stops early; the child also gives up after a minute
	want := map[string]string{}              // SOP UID -> sha256 of every Put that returned
	sc := bufio.NewScanner(stdout)
	for len(want) < answered && sc.Scan() {
		f := strings.Fields(sc.Text())
		if len(f) == 3 && f[0] == "ok" {
			want[f[1]] = f[2]
		}
	}
	if err := cmd.Process.Kill(); err != nil { // SIGKILL on Unix
		t.Fatal(err)
	}
	for sc.Scan() { // answers written before the kill landed
		if f := strings.Fields(sc.Text()); len(f) == 3 && f[0] == "ok" {
			want[f[1]] = f[2]
		}
	}
	cmd.Wait()
	if len(want) < answered {
		t.Fatalf("child answered only %d Puts before exiting: %s", len(want), stderr.String())
	}

	s, err := Open(testOptions(dir))
	if err != nil {
		t.Fatalf("Open after SIGKILL: %v", err)
	}
	defer s.Close()
	rep := s.LastReconcile()
	t.Logf("after the kill: %d answered Puts; reconcile %+v", len(want), rep)
	if len(rep.MissingFiles) != 0 || len(rep.Unreadable) != 0 {
		t.Errorf("reconcile found damage: %+v", rep)
	}
	for sop, sha := range want {
		in, err := s.Instance(sop)
		if err != nil {
			t.Errorf("answered Put %s lost: %v", sop, err)
			continue
		}
		b, err := os.ReadFile(filepath.Join(dir, in.Path))
		if err != nil || in.SHA256 != sha || in.Size != int64(len(b)) {
			t.Errorf("answered Put %s: file %v, record %+v", sop, err, in)
		}
	}
	if names := tmpFiles(t, dir); len(names) != 0 {
		t.Errorf("temp files left after Open: %v", names)
	}
	if _, err := s.Reconcile(t.Context()); err != nil {
		t.Errorf("Reconcile: %v", err)
	}
}
