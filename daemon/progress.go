package main

import (
	"fmt"
	"io"
	"strings"
	"time"
)

// progress draws a one-line progress bar on a terminal stream: simulated
// time covered, readings and the rate, redrawn at most twice a second.
type progress struct {
	w        io.Writer
	from, to time.Time
	start    time.Time
	last     time.Time
	first    time.Time
}

func newProgress(w io.Writer, from, to time.Time) *progress {
	return &progress{w: w, from: from, to: to, start: time.Now()}
}

func (p *progress) at(t time.Time, n int) {
	if p.w == nil {
		return
	}
	if p.first.IsZero() {
		p.first = t
	}
	if now := time.Now(); now.Sub(p.last) < 500*time.Millisecond {
		return
	} else {
		p.last = now
	}
	from, to := p.from, p.to
	if from.IsZero() {
		from = p.first
	}
	frac := 0.0
	if to.Year() < 9999 && to.After(from) {
		frac = float64(t.Sub(from)) / float64(to.Sub(from))
	}
	frac = min(max(frac, 0), 1)
	const width = 30
	bar := strings.Repeat("#", int(frac*width)) + strings.Repeat(".", width-int(frac*width))
	el := time.Since(p.start).Seconds()
	rate := t.Sub(from).Hours() / 24 / max(el, 1e-9)
	fmt.Fprintf(p.w, "\r[%s] %s  %d readings  %.1f days/s ", bar, t.UTC().Format("2006-01-02 15:04"), n, rate)
}

func (p *progress) done(n int) {
	if p.w == nil || p.last.IsZero() {
		return
	}
	fmt.Fprintf(p.w, "\r%s\r", strings.Repeat(" ", 90))
}
