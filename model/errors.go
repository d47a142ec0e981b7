package model

import (
	"errors"
	"fmt"
	"strings"
)

// InputError is a problem with what the user supplied (model file, data
// file or flags). File and Line locate it where known (Line 0: no line).
type InputError struct {
	File string
	Line int
	Msg  string
}

func (e *InputError) Error() string {
	switch {
	case e.File != "" && e.Line > 0:
		return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Msg)
	case e.File != "":
		return fmt.Sprintf("%s: %s", e.File, e.Msg)
	}
	return e.Msg
}

// IsInputError reports whether err (or any error it wraps or joins) is an
// InputError, i.e. whether the user's input rather than the program is at fault.
func IsInputError(err error) bool {
	var ie *InputError
	return errors.As(err, &ie)
}

// Inputf returns an InputError with a formatted message.
func Inputf(file string, line int, format string, args ...any) error {
	return &InputError{File: file, Line: line, Msg: fmt.Sprintf(format, args...)}
}

// maxReported caps how many problems one validation pass reports.
const maxReported = 20

// problems collects input errors up to maxReported.
type problems struct {
	errs    []error
	dropped int
}

func (p *problems) add(err error) {
	if len(p.errs) < maxReported {
		p.errs = append(p.errs, err)
		return
	}
	p.dropped++
}

func (p *problems) addf(file string, line int, format string, args ...any) {
	p.add(Inputf(file, line, format, args...))
}

func (p *problems) err() error {
	if len(p.errs) == 0 {
		return nil
	}
	if p.dropped > 0 {
		p.errs = append(p.errs, &InputError{Msg: fmt.Sprintf("... and %d more problems", p.dropped)})
	}
	return errors.Join(p.errs...)
}

// suggest returns ` (did you mean "x"?)` when one of the candidates is close
// to the misspelled word, else "".
func suggest(word string, candidates []string) string {
	best, bestD := "", 3
	for _, c := range candidates {
		if d := editDistance(strings.ToLower(word), c); d < bestD {
			best, bestD = c, d
		}
	}
	if best == "" {
		return ""
	}
	return fmt.Sprintf(" (did you mean %q?)", best)
}

// editDistance is the Levenshtein distance between a and b.
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}
