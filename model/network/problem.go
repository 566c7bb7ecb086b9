package network

import (
	"fmt"
	"strings"
)

// Severity says whether a problem rejects the file (Error) or only
// deserves a look (Warning).
type Severity uint8

const (
	// Error makes the file unusable; the reader rejects the whole file.
	Error Severity = iota
	// Warning is odd but legal; the file is still read.
	Warning
)

// String returns "error" or "warning".
func (s Severity) String() string {
	if s == Warning {
		return "warning"
	}
	return "error"
}

// Problem is one thing wrong with a network file or a Network, with its
// place: the file, the line the feature starts on, the feature's index
// in the "features" array and its id. Fields that are not known are
// zero (Line 0, Index -1, Feature "").
type Problem struct {
	File string
	// Line is the 1-based line where the feature (or the member) starts;
	// 0 if not known.
	Line int
	// Index is the position in the file's "features" array; -1 for a
	// problem of the file as a whole or of a Network built in code.
	Index int
	// Feature is the feature's id ("" if it has none or the problem is
	// file-wide).
	Feature string
	// Property is the property (or member path such as
	// "network.headloss") the problem is about; "" if it is about the
	// feature as a whole.
	Property string
	Message  string
	Severity Severity
}

// Place returns "file:line", "file" or "" for the problem.
func (p Problem) Place() string {
	switch {
	case p.File != "" && p.Line > 0:
		return fmt.Sprintf("%s:%d", p.File, p.Line)
	case p.Line > 0:
		return fmt.Sprintf("line %d", p.Line)
	}
	return p.File
}

// Subject names the feature the problem is about: its id, or
// "features[i]" when it has none, or "" for a file-wide problem.
func (p Problem) Subject() string {
	switch {
	case p.Feature != "":
		return p.Feature
	case p.Index >= 0:
		return fmt.Sprintf("features[%d]", p.Index)
	}
	return ""
}

// String formats the problem on one line:
// "file:line: feature ID: property: message" (parts that are not known
// are left out), with "warning: " before the message of a warning.
func (p Problem) String() string {
	var b strings.Builder
	if pl := p.Place(); pl != "" {
		b.WriteString(pl)
		b.WriteString(": ")
	}
	if s := p.Subject(); s != "" {
		b.WriteString("feature ")
		b.WriteString(s)
		b.WriteString(": ")
	}
	if p.Property != "" {
		b.WriteString(p.Property)
		b.WriteString(": ")
	}
	if p.Severity == Warning {
		b.WriteString("warning: ")
	}
	b.WriteString(p.Message)
	return b.String()
}

// HasErrors reports whether any problem is an Error.
func HasErrors(ps []Problem) bool {
	for _, p := range ps {
		if p.Severity == Error {
			return true
		}
	}
	return false
}

// ValidationError rejects a network file (or a Network) and lists every
// error-severity problem found in it, in file order.
type ValidationError struct {
	File     string
	Problems []Problem
}

// Error lists the problems, one per line after a heading line.
func (e *ValidationError) Error() string {
	var b strings.Builder
	name := e.File
	if name == "" {
		name = "network"
	}
	n := len(e.Problems)
	if n == 1 {
		fmt.Fprintf(&b, "%s: 1 problem:", name)
	} else {
		fmt.Fprintf(&b, "%s: %d problems:", name, n)
	}
	for _, p := range e.Problems {
		b.WriteString("\n  ")
		b.WriteString(p.String())
	}
	return b.String()
}

// errorsOnly returns the Error-severity problems of ps.
func errorsOnly(ps []Problem) []Problem {
	var out []Problem
	for _, p := range ps {
		if p.Severity == Error {
			out = append(out, p)
		}
	}
	return out
}
