package main

import (
	"bytes"
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// goBuild builds a package of this module (or of its dependencies) into
// dir and returns the binary's path.
func goBuild(t *testing.T, dir, name, pkg string) string {
	t.Helper()
	out := filepath.Join(dir, name)
	cmd := exec.Command("go", "build", "-o", out, pkg)
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build %s: %v\n%s", pkg, err, b)
	}
	return out
}

// freePort returns a TCP port free on the loopback address a moment ago.
func freePort(t *testing.T) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// TestPipelineOnJobServer: the pipeline submitted, as a cluster job is, to
// a standalone prism job server that runs its workers as separate
// processes (the PROCESS environment: Beam's boot loader, which fetches
// the staged worker binary and runs it), over the same 8 Parquet shards,
// writes the one-machine job's bytes. This is the client path of a Flink
// or Spark submission: the job API, the staging of the worker binary, and
// workers that are not the launcher.
//
// Two of the job server's ways are worked around (see
// ../shared/reference/scale-out-notes.md): it passes the worker id with
// literal quotes, which a wrapper script strips before the boot loader
// reads it; and a job that fails to start hangs, so the job runs under a
// deadline. Everything the job server, the boot loader and the workers
// leave (staged binaries, semi-persistent files, processes) is kept in the
// test's directory and process group, and removed.
func TestPipelineOnJobServer(t *testing.T) {
	sizes := testSizes()
	work := t.TempDir()
	data := filepath.Join(work, "data")
	os.MkdirAll(data, 0o755)
	writeDataset(t, data, sizes)
	bin := filepath.Join(work, "bin")
	os.MkdirAll(bin, 0o755)
	prismBin := goBuild(t, bin, "prism", "github.com/apache/beam/sdks/v2/go/cmd/prism")
	boot := goBuild(t, bin, "boot", "github.com/apache/beam/sdks/v2/go/container")
	self := goBuild(t, bin, "manyfold-beam", ".")
	tmp := filepath.Join(work, "tmp")
	persist := filepath.Join(work, "persist")
	os.MkdirAll(tmp, 0o755)
	os.MkdirAll(persist, 0o755)
	wrapper := filepath.Join(bin, "boot.sh")
	script := fmt.Sprintf("#!/usr/bin/env bash\nexec %q \"${@//\\'/}\" --semi_persist_dir=%q\n", boot, persist)
	if err := os.WriteFile(wrapper, []byte(script), 0o755); err != nil {
		t.Fatal(err)
	}
	env := append(os.Environ(), "TMPDIR="+tmp)

	port := freePort(t)
	server := exec.Command(prismBin, "--job_port", fmt.Sprint(port), "--serve_http=false")
	server.Env, server.Dir = env, work // it writes pipeline_options.json where it runs
	server.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	var serverLog bytes.Buffer
	server.Stdout, server.Stderr = &serverLog, &serverLog
	if err := server.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		syscall.Kill(-server.Process.Pid, syscall.SIGKILL) // the server and the workers it started
		server.Wait()
	})
	for start := time.Now(); ; {
		if c, err := net.Dial("tcp", fmt.Sprintf("127.0.0.1:%d", port)); err == nil {
			c.Close()
			break
		}
		if time.Since(start) > 30*time.Second {
			t.Fatalf("the job server did not listen:\n%s", serverLog.String())
		}
		time.Sleep(100 * time.Millisecond)
	}

	job := Job{Target: "late", Columns: "dest_postcode,sender_account,route", Methods: "target:eb+freq+topk:20", FoldBy: "rows", Scheme: "kfold", Folds: 5, Seed: 3, Partitions: 16, Format: "csv"}
	want := reference(t, job, data, filepath.Join(work, "ref.csv"), filepath.Join(work, "ref-tables"))
	out, tables := filepath.Join(work, "out"), filepath.Join(work, "tables")
	ctx, cancel := context.WithTimeout(context.Background(), 8*time.Minute)
	defer cancel()
	run := exec.CommandContext(ctx, self,
		"-runner", "universal", "-endpoint", fmt.Sprintf("localhost:%d", port),
		"-environment_type", "PROCESS", "-environment_config", fmt.Sprintf(`{"command": %q}`, wrapper),
		"-worker_binary", self,
		"-input", filepath.Join(data, "part-*.parquet"), "-out", out, "-tables", tables,
		"-target", job.Target, "-columns", job.Columns, "-methods", job.Methods, "-folds", "5", "-seed", "3",
		"-partitions", "16", "-format", "csv")
	run.Env, run.Dir = env, work
	run.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	log, err := run.CombinedOutput()
	if err != nil {
		t.Fatalf("the job: %v\n%s\nthe job server:\n%s", err, tail(log), tail(serverLog.Bytes()))
	}
	if !strings.Contains(serverLog.String(), "Worker exited successfully") {
		t.Errorf("no worker process reported; the job server said:\n%s", tail(serverLog.Bytes()))
	}
	noStray(t, out, len(sizes))
	if got := concatenated(t, out, len(sizes)); !bytes.Equal(got, want) {
		t.Errorf("the encoded shards differ from the one-machine output (%d and %d bytes)", len(got), len(want))
	}
	sameDirs(t, tables, filepath.Join(work, "ref-tables"))
}

// tail returns the last 40 lines of a log.
func tail(b []byte) string {
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	return strings.Join(lines[max(0, len(lines)-40):], "\n")
}
