package testenv

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"sync"
	"syscall"
	"testing"
	"time"
)

// process is one server process started from a fixed command line, which
// can be stopped and started again any number of times. Output goes to a
// log file that is appended to across restarts.
type process struct {
	name    string
	bin     string
	args    []string
	logPath string
	ready   func() error // nil when the server answers

	mu   sync.Mutex
	cmd  *exec.Cmd
	done chan struct{} // closed when cmd has exited
}

// start launches the process and waits up to 60 s until ready answers.
func (p *process) start() error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.cmd != nil {
		return fmt.Errorf("%s: already running", p.name)
	}
	logf, err := os.OpenFile(p.logPath, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		return fmt.Errorf("%s: log: %w", p.name, err)
	}
	cmd := exec.Command(p.bin, p.args...)
	cmd.Stdout = logf
	cmd.Stderr = logf
	cmd.SysProcAttr = sysProcAttr()
	if err := cmd.Start(); err != nil {
		logf.Close()
		return fmt.Errorf("%s: start %s: %w", p.name, p.bin, err)
	}
	done := make(chan struct{})
	// The waiter goroutine belongs to this process value; it ends when
	// the process exits, which stop and t.Cleanup guarantee.
	go func() {
		_ = cmd.Wait()
		logf.Close()
		close(done)
	}()
	p.cmd, p.done = cmd, done

	deadline := time.Now().Add(60 * time.Second)
	for {
		select {
		case <-done:
			p.cmd = nil
			return fmt.Errorf("%s exited during start-up: %s", p.name, p.logTail())
		default:
		}
		err := p.ready()
		if err == nil {
			return nil
		}
		if time.Now().After(deadline) {
			p.stopLocked(syscall.SIGKILL)
			return fmt.Errorf("%s did not answer within 60 s (%v): %s", p.name, err, p.logTail())
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// stop sends sig and waits for the process to exit (SIGKILL after 15 s).
// Stopping a stopped process does nothing.
func (p *process) stop(sig syscall.Signal) {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.stopLocked(sig)
}

func (p *process) stopLocked(sig syscall.Signal) {
	if p.cmd == nil {
		return
	}
	_ = p.cmd.Process.Signal(sig)
	select {
	case <-p.done:
	case <-time.After(15 * time.Second):
		_ = p.cmd.Process.Kill()
		<-p.done
	}
	p.cmd, p.done = nil, nil
}

func (p *process) running() bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.cmd != nil
}

// logTail returns the last lines of the log for error messages.
func (p *process) logTail() string {
	b, err := os.ReadFile(p.logPath)
	if err != nil {
		return "(no log: " + err.Error() + ")"
	}
	if len(b) > 2000 {
		b = b[len(b)-2000:]
	}
	b = bytes.TrimSpace(b)
	if len(b) == 0 {
		return "(log " + p.logPath + " is empty)"
	}
	return "log " + p.logPath + ":\n" + string(b)
}

// register stops the process when the test ends.
func (p *process) register(t testing.TB) {
	t.Cleanup(func() { p.stop(syscall.SIGTERM) })
}
