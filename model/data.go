package model

import (
	"bytes"
	"cmp"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"maps"
	"math"
	"os"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"
)

// Outcome is an outcome resolved against the data.
type Outcome struct {
	Name string
	Type OutcomeType
	// K is the number of categories (0 for continuous outcomes).
	K int
	// Codes names the categories in order, as they appear in the data.
	Codes []string
	// Note is a remark on the outcome's values for the summary ("" none).
	Note string
}

// Panel is the data arranged on the occasion grid. Person i occupies grid
// positions 0..Len[i]-1 (the grid is the sorted union of occasion values, so
// a skipped wave is a missing occasion, not a shorter lag). Positions after a
// person's last observed value are dropped: they carry no information.
// Cell (i, t, j) is Y[Offset[i]+t*J+j]: a category 0..K-1, a continuous
// value, or NaN for missing.
type Panel struct {
	File      string
	Raw       []byte // the file's content, kept so a run folder can hold a copy
	SHA256    string
	Rows      int
	Outcomes  []Outcome
	Persons   []string
	Occasions []int
	Len       []int
	Offset    []int
	Y         []float64
	Notes     []string
}

// J returns the number of outcomes.
func (p *Panel) J() int { return len(p.Outcomes) }

// T returns the number of grid occasions.
func (p *Panel) T() int { return len(p.Occasions) }

// Cells returns the number of person-occasion-outcome cells.
func (p *Panel) Cells() int { return len(p.Y) }

// ObservedAt returns, for outcome j, the number of persons with an
// observed value at each grid occasion.
func (p *Panel) ObservedAt(j int) []int {
	J := p.J()
	n := make([]int, p.T())
	for i := range p.Persons {
		for t := 0; t < p.Len[i]; t++ {
			if v := p.Y[p.Offset[i]+t*J+j]; v == v {
				n[t]++
			}
		}
	}
	return n
}

// AnsweredAt returns the number of persons with an observed value of any
// outcome at each grid occasion.
func (p *Panel) AnsweredAt() []int {
	J := p.J()
	n := make([]int, p.T())
	for i := range p.Persons {
		for t := 0; t < p.Len[i]; t++ {
			if slices.ContainsFunc(p.Y[p.Offset[i]+t*J:p.Offset[i]+(t+1)*J], func(v float64) bool { return v == v }) {
				n[t]++
			}
		}
	}
	return n
}

// CellOf returns the person, grid occasion and outcome of cell c of Y.
func (p *Panel) CellOf(c int) (i, t, j int) {
	i = sort.SearchInts(p.Offset, c+1) - 1
	J := p.J()
	r := c - p.Offset[i]
	return i, r / J, r % J
}

// LoadPanel reads the CSV named by sp.Data.File.
func LoadPanel(sp *Spec) (*Panel, error) {
	raw, err := os.ReadFile(sp.Data.File)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, Inputf(sp.Path, 0, "data.csv: %s does not exist", sp.Data.File)
		}
		return nil, Inputf(sp.Data.File, 0, "cannot read data file: %v", err)
	}
	return ParsePanel(sp, sp.Data.File, raw)
}

type cellRow struct {
	person string
	occ    int
	vals   []string
	line   int
	cols   []string // wide layout: the column of each outcome's value ("" none)
}

// at names the column of outcome k's value in wide data, for messages.
func (r cellRow) at(k int) string {
	if r.cols == nil || r.cols[k] == "" {
		return ""
	}
	return fmt.Sprintf(" (column %q)", r.cols[k])
}

// ParsePanel parses CSV content raw (named file in messages): long layout
// (one row per person and occasion) or, with data.layout: wide, one row
// per person and one column per outcome and occasion.
func ParsePanel(sp *Spec, file string, raw []byte) (*Panel, error) {
	sum := sha256.Sum256(raw)
	orig := raw
	raw = bytes.TrimPrefix(raw, []byte("\xef\xbb\xbf"))
	r := csv.NewReader(bytes.NewReader(raw))
	r.FieldsPerRecord = -1
	r.Comma = separator(sp.Data.Separator, raw)
	header, err := r.Read()
	if err == io.EOF {
		return nil, Inputf(file, 0, "data file is empty; expected a header row naming the columns and at least one data row")
	}
	if err != nil {
		return nil, Inputf(file, 1, "cannot read the header row: %v", csvMsg(err))
	}
	p := &problems{}
	// Spreadsheets often save empty columns after the last one: drop them.
	trailing := 0
	for len(header) > 1 && strings.TrimSpace(header[len(header)-1]) == "" {
		header = header[:len(header)-1]
		trailing++
	}
	col := map[string]int{}
	for i, h := range header {
		h = strings.TrimSpace(h)
		header[i] = h
		if _, dup := col[h]; dup {
			return nil, Inputf(file, 1, "column %q appears twice in the header", h)
		}
		col[h] = i
	}
	var notes []string
	if trailing > 0 {
		notes = append(notes, fmt.Sprintf("%s without a name at the end of the header ignored", plural(trailing, "empty column", "empty columns")))
	}
	missing := map[string]bool{}
	for _, m := range sp.Data.Missing {
		missing[m] = true
	}
	// cell returns the text of a value cell, "\x00" when it is missing.
	cell := func(text string) string {
		v := strings.TrimSpace(text)
		if missing[v] || missing[text] {
			return "\x00"
		}
		return v
	}
	// person reads and checks the person cell of a row.
	person := func(rec []string, i, line int) (string, bool) {
		id := strings.TrimSpace(rec[i])
		if id == "" || missing[id] {
			p.addf(file, line, "column %q: person is missing", sp.Data.Person)
			return "", false
		}
		if strings.ContainsAny(id, "\r\n") {
			p.addf(file, line, "column %q: person %q contains a line break; use an id on one line", sp.Data.Person, id)
			return "", false
		}
		return id, true
	}
	var rows []cellRow
	empty := 0
	firstLine := map[string]int{} // wide layout: the row of each person
	if sp.Data.Wide {
		wc, err := wideColumns(sp, file, header, col)
		if err != nil {
			return nil, err
		}
		pi := col[sp.Data.Person]
		empty = readRecords(r, file, len(header), trailing, p, func(rec []string, line int) {
			id, ok := person(rec, pi, line)
			if !ok {
				return
			}
			if prev, dup := firstLine[id]; dup {
				p.addf(file, line, "person %q is also on line %d; wide data has one row per person", id, prev)
				return
			}
			firstLine[id] = line
			for _, w := range wc {
				c := cellRow{line: line, person: id, occ: w.occ, cols: w.names}
				for _, i := range w.idx {
					if i < 0 {
						c.vals = append(c.vals, "\x00")
					} else {
						c.vals = append(c.vals, cell(rec[i]))
					}
				}
				rows = append(rows, c)
			}
		})
	} else {
		need := []string{sp.Data.Person, sp.Data.Occasion}
		for _, o := range sp.Outcomes {
			need = append(need, o.Name)
		}
		idx := make([]int, len(need))
		for k, name := range need {
			i, ok := col[name]
			if !ok {
				p.addf(file, 1, "missing column %q named in %s%s; the header has: %s%s", name, sp.Path, suggest(name, header), clip(header, 12), wideHint(name, header))
			}
			idx[k] = i
		}
		if err := p.err(); err != nil {
			return nil, err
		}
		empty = readRecords(r, file, len(header), trailing, p, func(rec []string, line int) {
			id, ok := person(rec, idx[0], line)
			if !ok {
				return
			}
			c := cellRow{line: line, person: id}
			occText := strings.TrimSpace(rec[idx[1]])
			occ, ok := parseOccasion(occText)
			if !ok {
				hint := ""
				if dateLike.MatchString(occText) {
					hint = "; it looks like a date or time: recode it as a whole number of days (or hours) since a start, e.g. the study day"
				}
				p.addf(file, line, "column %q: occasion %q is not a whole number (occasions must be integers that order the waves or days)%s", sp.Data.Occasion, clipCell(occText), hint)
				return
			}
			c.occ = occ
			for k := range sp.Outcomes {
				c.vals = append(c.vals, cell(rec[idx[2+k]]))
			}
			rows = append(rows, c)
		})
	}
	if err := p.err(); err != nil {
		return nil, err
	}
	if len(rows) == 0 {
		return nil, Inputf(file, 0, "data file has a header but no data rows")
	}
	if empty > 0 {
		notes = append(notes, fmt.Sprintf("%s with every cell empty skipped", plural(empty, "row", "rows")))
	}
	pan := &Panel{File: file, Raw: orig, SHA256: hex.EncodeToString(sum[:]), Rows: len(rows), Notes: notes}
	if sp.Data.Wide {
		pan.Rows = len(firstLine)
	}
	pan.Outcomes = make([]Outcome, len(sp.Outcomes))
	for k, o := range sp.Outcomes {
		out, err := resolveOutcome(sp, file, o, rows, k)
		if err != nil {
			p.add(err)
			continue
		}
		pan.Outcomes[k] = out
		if out.Note != "" {
			pan.Notes = append(pan.Notes, out.Note)
		}
	}
	if err := p.err(); err != nil {
		return nil, err
	}
	if err := pan.arrange(sp, file, rows); err != nil {
		return nil, err
	}
	return pan, nil
}

// maxCell is the longest cell a data file may hold.
const maxCell = 1 << 16

// readRecords reads the data rows after the header, skipping blank lines
// and rows whose every cell is empty (it returns how many of those), and
// recording malformed rows in p, and hands each good row to fn with its
// line number. Up to trailing empty cells after the last named column are
// dropped.
func readRecords(r *csv.Reader, file string, fields, trailing int, p *problems, fn func(rec []string, line int)) (emptyRows int) {
	for {
		rec, err := r.Read()
		if err == io.EOF {
			return emptyRows
		}
		if err != nil {
			line := 0
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				line = pe.StartLine
			}
			p.addf(file, line, "%v", csvMsg(err))
			if len(p.errs) >= maxReported {
				return emptyRows
			}
			continue
		}
		line, _ := r.FieldPos(0)
		if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
			continue // blank line
		}
		if !slices.ContainsFunc(rec, func(c string) bool { return strings.TrimSpace(c) != "" }) {
			emptyRows++ // a row of empty cells, as spreadsheets save them
			continue
		}
		if k := slices.IndexFunc(rec, func(c string) bool { return len(c) > maxCell }); k >= 0 {
			p.addf(file, line, "field %d is %d characters long (at most %d): no person id, occasion or answer is that long; is this the right file, or a column of free text?", k+1, len(rec[k]), maxCell)
			if len(p.errs) >= maxReported {
				return emptyRows
			}
			continue
		}
		for len(rec) > fields && len(rec) <= fields+trailing && strings.TrimSpace(rec[len(rec)-1]) == "" {
			rec = rec[:len(rec)-1]
		}
		if len(rec) != fields {
			p.addf(file, line, "expected %d fields as in the header, got %d", fields, len(rec))
			continue
		}
		fn(rec, line)
	}
}

// wideOccasion is one occasion of wide data: the column index of each
// outcome's value there (-1: no column) and the column names.
type wideOccasion struct {
	occ   int
	idx   []int
	names []string
}

// wideColumns maps the header of wide data to occasions: each outcome's
// columns are the ones its columns: map names or, else, the header names
// that fit data.wide_columns with the outcome's name and a whole number.
func wideColumns(sp *Spec, file string, header []string, col map[string]int) ([]wideOccasion, error) {
	p := &problems{}
	if _, ok := col[sp.Data.Person]; !ok {
		p.addf(file, 1, "missing column %q named in %s%s; the header has: %s", sp.Data.Person, sp.Path, suggest(sp.Data.Person, header), strings.Join(header, ", "))
	}
	J := len(sp.Outcomes)
	at := map[int][]int{} // occasion -> column per outcome
	claimed := map[int]string{}
	set := func(j, occ, i int) {
		if at[occ] == nil {
			at[occ] = slices.Repeat([]int{-1}, J)
		}
		at[occ][j] = i
	}
	for j, o := range sp.Outcomes {
		if o.Columns != nil {
			for occ, name := range o.Columns {
				i, ok := col[name]
				if !ok {
					p.addf(file, 1, "missing column %q (outcome %q, occasion %d in %s)%s", name, o.Name, occ, sp.Path, suggest(name, header))
					continue
				}
				if prev, dup := claimed[i]; dup {
					p.addf(file, 1, "column %q is given to both %s and outcome %q", name, prev, o.Name)
				}
				claimed[i] = fmt.Sprintf("outcome %q", o.Name)
				set(j, occ, i)
			}
			continue
		}
		// The pattern with the outcome's name in place of {outcome} and a
		// whole number in place of {occasion}; the rest is literal text.
		quote := func(part string) string {
			pieces := strings.Split(part, "{outcome}")
			for i := range pieces {
				pieces[i] = regexp.QuoteMeta(pieces[i])
			}
			return strings.Join(pieces, regexp.QuoteMeta(o.Name))
		}
		pre, post, _ := strings.Cut(sp.Data.WideColumns, "{occasion}")
		re, err := regexp.Compile("^" + quote(pre) + "(-?[0-9]+)" + quote(post) + "$")
		if err != nil {
			return nil, Inputf(sp.Path, 0, "data.wide_columns: %v", err)
		}
		found := 0
		for i, h := range header {
			m := re.FindStringSubmatch(h)
			if m == nil {
				continue
			}
			occ, err := strconv.Atoi(m[1])
			if err != nil || occ < -1_000_000_000 || occ > 1_000_000_000 {
				continue
			}
			if prev, dup := claimed[i]; dup {
				p.addf(file, 1, "column %q fits the pattern %q for both %s and outcome %q; name the columns with the outcomes' columns key", h, sp.Data.WideColumns, prev, o.Name)
				continue
			}
			if at[occ] != nil && at[occ][j] >= 0 {
				p.addf(file, 1, "columns %q and %q are both outcome %q at occasion %d", header[at[occ][j]], h, o.Name, occ)
				continue
			}
			claimed[i] = fmt.Sprintf("outcome %q", o.Name)
			set(j, occ, i)
			found++
		}
		if found == 0 {
			example := strings.NewReplacer("{outcome}", o.Name, "{occasion}", "1").Replace(sp.Data.WideColumns)
			// Suggest the outcome names the header's columns have once the
			// occasion numbers are taken off (moood_1, moood_2: "moood").
			stems := map[string]bool{}
			for _, h := range header {
				if st := strings.TrimRight(strings.TrimRight(h, "0123456789"), "_.- "); st != h && st != "" {
					stems[st] = true
				}
			}
			p.addf(file, 1, "no column for outcome %q: expected names like %q (data.wide_columns: %q in %s)%s; the header has: %s", o.Name, example, sp.Data.WideColumns, sp.Path, suggest(o.Name, slices.Sorted(maps.Keys(stems))), clip(header, 12))
		}
	}
	if i, ok := col[sp.Data.Person]; ok {
		if what, dup := claimed[i]; dup {
			p.addf(file, 1, "column %q is the person column and also a column of %s", sp.Data.Person, what)
		}
	}
	if err := p.err(); err != nil {
		return nil, err
	}
	out := make([]wideOccasion, 0, len(at))
	for occ, idx := range at {
		w := wideOccasion{occ: occ, idx: idx, names: make([]string, J)}
		for j, i := range idx {
			if i >= 0 {
				w.names[j] = header[i]
			}
		}
		out = append(out, w)
	}
	slices.SortFunc(out, func(a, b wideOccasion) int { return cmp.Compare(a.occ, b.occ) })
	return out, nil
}

// separator returns the field separator: the one data.separator names,
// else a semicolon or tab when the header line has one of those but no
// comma (as spreadsheets in many locales save "CSV" files).
func separator(name string, raw []byte) rune {
	switch name {
	case "comma":
		return ','
	case "semicolon":
		return ';'
	case "tab":
		return '\t'
	}
	head, _, _ := bytes.Cut(raw, []byte("\n"))
	if !bytes.ContainsRune(head, ',') {
		switch {
		case bytes.ContainsRune(head, ';'):
			return ';'
		case bytes.ContainsRune(head, '\t'):
			return '\t'
		}
	}
	return ','
}

// wideHint says that long data probably meant wide data when the header
// has columns named like outcome name plus occasion (mood_1, mood2).
func wideHint(name string, header []string) string {
	re := regexp.MustCompile(`^` + regexp.QuoteMeta(name) + `[_.\- ]?(w|t|wave|day)?[0-9]+$`)
	var hits []string
	for _, h := range header {
		if re.MatchString(h) {
			hits = append(hits, h)
		}
	}
	if len(hits) < 2 {
		return ""
	}
	return fmt.Sprintf(". Columns %s look like one column per occasion: if the file has one row per person, set data.layout: wide (and data.wide_columns if the names are not {outcome}_{occasion})", clip(hits, 4))
}

// dateLike matches occasion texts that look like dates or times.
var dateLike = regexp.MustCompile(`^\d{1,4}[-/.]\d{1,2}[-/.]\d{1,4}|^\d{1,2}:\d{2}`)

// commonMissing are texts that other programs and spreadsheets write for
// a missing answer.
var commonMissing = []string{"n/a", "na", ".", "-", "-9", "-99", "-999", "-9999", "nan", "null", "none", "missing", "?", "#n/a", "99", "999"}

// numericMissing are the numbers among them that a continuous outcome
// would read as values.
var numericMissing = []string{"-9", "-99", "-999", "-9999", "999", "9999"}

// missingHint suggests adding v to the missing codes when it is a common
// missing-value text.
func missingHint(v string) string {
	if slices.Contains(commonMissing, strings.ToLower(v)) {
		return fmt.Sprintf("; if %q means a missing answer, add it to data.missing_codes", v)
	}
	return ""
}

// clipCell shortens a cell's text for a message.
func clipCell(v string) string {
	if r := []rune(v); len(r) > 40 {
		return string(r[:37]) + "..."
	}
	return v
}

func csvMsg(err error) string {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return pe.Err.Error()
	}
	return err.Error()
}

func parseOccasion(s string) (int, bool) {
	if v, err := strconv.Atoi(s); err == nil {
		return v, true
	}
	f, err := strconv.ParseFloat(s, 64)
	if err != nil || f != math.Trunc(f) || math.Abs(f) > 1e9 {
		return 0, false
	}
	return int(f), true
}

// maxContinuous is the largest absolute value a continuous outcome may
// take: the sum of squares of a million such values stays finite.
const maxContinuous = 1e150

// resolveOutcome fixes the category coding of outcome k and checks values.
func resolveOutcome(sp *Spec, file string, o OutcomeSpec, rows []cellRow, k int) (Outcome, error) {
	out := Outcome{Name: o.Name, Type: o.Type}
	p := &problems{}
	switch {
	case o.Type == Continuous:
		sentinel := map[string]int{} // numbers that are common missing-value codes
		for _, r := range rows {
			v := r.vals[k]
			if v == "\x00" {
				continue
			}
			if slices.Contains(numericMissing, v) {
				sentinel[v]++
			}
			f, err := strconv.ParseFloat(v, 64)
			switch {
			case err != nil || math.IsNaN(f) || math.IsInf(f, 0):
				p.addf(file, r.line, "outcome %q%s: %q is not a finite number (continuous outcome; missing cells may be %s)%s", o.Name, r.at(k), clipCell(v), quoteList(sp.Data.Missing), missingHint(v))
			case math.Abs(f) > maxContinuous:
				// Standardizing squares the values: beyond this their sum
				// of squares overflows.
				p.addf(file, r.line, "outcome %q%s: %s is too large to analyse (at most %g in absolute value); a huge number like this is often a missing-value code of another program: add it to data.missing_codes", o.Name, r.at(k), clipCell(v), maxContinuous)
			}
		}
		for _, code := range numericMissing {
			if n := sentinel[code]; n > 0 {
				out.Note = fmt.Sprintf("outcome %q: %s %s, a common missing-value code; if it means a missing answer, add it to data.missing_codes", o.Name, plural(n, "cell holds", "cells hold"), code)
			}
		}
		return out, p.err()
	case len(o.Labels) > 0:
		out.K, out.Codes = len(o.Labels), o.Labels
		for _, r := range rows {
			if v := r.vals[k]; v != "\x00" && !slices.Contains(o.Labels, v) {
				p.addf(file, r.line, "outcome %q%s: %q is not one of the declared labels %s%s", o.Name, r.at(k), clipCell(v), quoteList(o.Labels), missingHint(v))
			}
		}
		return out, p.err()
	}
	// Integer codes.
	lo, hi := math.MaxInt, math.MinInt
	distinct := map[string]bool{}
	for _, r := range rows {
		v := r.vals[k]
		if v == "\x00" {
			continue
		}
		distinct[v] = true
		c, ok := parseOccasion(v)
		if !ok {
			hint := ""
			if o.Type == Binary {
				hint = fmt.Sprintf("; for text answers declare labels, e.g. labels: [no, yes] (lower category first)")
			}
			if h := missingHint(v); h != "" {
				hint = h
			}
			p.addf(file, r.line, "outcome %q%s: %q is not a whole-number category code%s", o.Name, r.at(k), clipCell(v), hint)
			continue
		}
		lo, hi = min(lo, c), max(hi, c)
	}
	if err := p.err(); err != nil {
		return out, err
	}
	if o.Type == Binary && len(distinct) > 2 {
		vals := make([]string, 0, len(distinct))
		for v := range distinct {
			vals = append(vals, v)
		}
		slices.Sort(vals)
		return out, Inputf(file, 0, "outcome %q is binary but has %d distinct values (%s); a binary outcome has exactly two", o.Name, len(vals), strings.Join(vals, ", "))
	}
	if lo == math.MaxInt {
		return out, Inputf(file, 0, "outcome %q has no observed values", o.Name)
	}
	if o.Type == Binary && o.Lowest == nil && (lo < 0 || hi > 1) {
		codes := make([]string, 0, len(distinct))
		for v := range distinct {
			codes = append(codes, v)
		}
		slices.SortFunc(codes, func(a, b string) int { x, _ := parseOccasion(a); y, _ := parseOccasion(b); return cmp.Compare(x, y) })
		hint := fmt.Sprintf("labels: [%q, %q] (lower category first, so %q is modelled as the upper one) or lowest: %d", codes[0], codes[len(codes)-1], codes[len(codes)-1], lo)
		if len(codes) == 1 {
			hint = fmt.Sprintf("labels: [\"<the other code>\", %q] with the lower category first", codes[0])
		}
		return out, Inputf(file, 0, "outcome %q is binary but coded %s, not 0/1: say which code is the upper category (\"yes\") in %s with %s",
			o.Name, strings.Join(codes, " and "), sp.Path, hint)
	}
	lowest := lo
	if o.Type == Binary && o.Lowest == nil && lo >= 0 && hi <= 1 {
		lowest = 0
	}
	if o.Lowest != nil {
		lowest = *o.Lowest
	}
	K := o.Categories
	if K == 0 {
		K = hi - lowest + 1
		if o.Type == Binary {
			K = 2
		}
		if o.Type == Ordinal && K < 3 {
			return out, Inputf(file, 0, "outcome %q: only categories %d..%d occur, fewer than the 3 an ordinal outcome needs; declare categories: K or use type: binary", o.Name, lowest, hi)
		}
		if K > 11 {
			return out, Inputf(file, 0, "outcome %q: codes run from %d to %d, more than 11 categories; declare lowest and categories, or treat it as continuous", o.Name, lowest, hi)
		}
	}
	out.K = K
	for c := 0; c < K; c++ {
		out.Codes = append(out.Codes, strconv.Itoa(lowest+c))
	}
	for _, r := range rows {
		v := r.vals[k]
		if v == "\x00" {
			continue
		}
		c, _ := parseOccasion(v)
		if c < lowest || c >= lowest+K {
			p.addf(file, r.line, "outcome %q%s: category %d outside %d..%d (declared categories: %d%s)", o.Name, r.at(k), c, lowest, lowest+K-1, K, lowestNote(o))
		}
	}
	return out, p.err()
}

func lowestNote(o OutcomeSpec) string {
	if o.Lowest != nil {
		return fmt.Sprintf(", lowest: %d", *o.Lowest)
	}
	return ", lowest taken from the data; set lowest: to fix it"
}

func quoteList(xs []string) string {
	q := make([]string, len(xs))
	for i, x := range xs {
		q[i] = strconv.Quote(x)
	}
	return "[" + strings.Join(q, ", ") + "]"
}

// arrange places the rows on the occasion grid, person by person.
func (pan *Panel) arrange(sp *Spec, file string, rows []cellRow) error {
	J := len(sp.Outcomes)
	occSet := map[int]bool{}
	byPerson := map[string][]int{}
	for i, r := range rows {
		occSet[r.occ] = true
		byPerson[r.person] = append(byPerson[r.person], i)
	}
	values := make([]int, 0, len(occSet))
	for o := range occSet {
		values = append(values, o)
	}
	slices.Sort(values)
	grid, err := occasionGrid(file, sp, values)
	if err != nil {
		return err
	}
	pan.Occasions = grid
	pos := map[int]int{}
	for i, o := range pan.Occasions {
		pos[o] = i
	}
	if len(grid) > len(values) {
		var empty []string
		for _, o := range grid {
			if !occSet[o] {
				empty = append(empty, strconv.Itoa(o))
			}
		}
		step := grid[1] - grid[0]
		what, verb, as := "occasion", "is", "an empty occasion"
		if len(empty) > 1 {
			what, verb, as = "occasions", "are", "empty occasions"
		}
		pan.Notes = append(pan.Notes, fmt.Sprintf("%s %s %s not in the data: inserted as %s with no answers, so that occasions %d to %d are equally spaced by %d (one lag is one step of %d)",
			what, clip(empty, 10), verb, as, grid[0], grid[len(grid)-1], step, step))
	}
	persons := make([]string, 0, len(byPerson))
	for id := range byPerson {
		persons = append(persons, id)
	}
	sortPersons(persons)
	if same := sameNumberIDs(persons); len(same) > 0 {
		pan.Notes = append(pan.Notes, fmt.Sprintf("person ids %s are the same number written differently and are taken as different persons; if they are one person, write the id one way", clip(same, 5)))
	}
	p := &problems{}
	var dropped []string
	for _, id := range persons {
		idxs := byPerson[id]
		seen := map[int]int{}
		last := -1
		for _, ri := range idxs {
			r := rows[ri]
			if prev, dup := seen[r.occ]; dup {
				p.addf(file, r.line, "person %q has occasion %d twice (also on line %d); each person-occasion pair must appear once", id, r.occ, prev)
				continue
			}
			seen[r.occ] = r.line
			for k := range J {
				if r.vals[k] != "\x00" {
					last = max(last, pos[r.occ])
				}
			}
		}
		if last < 0 {
			dropped = append(dropped, id)
			continue
		}
		T := last + 1
		off := len(pan.Y)
		pan.Persons = append(pan.Persons, id)
		pan.Offset = append(pan.Offset, off)
		pan.Len = append(pan.Len, T)
		for range T * J {
			pan.Y = append(pan.Y, math.NaN())
		}
		for _, ri := range idxs {
			r := rows[ri]
			t := pos[r.occ]
			if t >= T {
				continue
			}
			for k, o := range pan.Outcomes {
				v := r.vals[k]
				if v == "\x00" {
					continue
				}
				pan.Y[off+t*J+k] = codeOf(o, v)
			}
		}
	}
	if err := p.err(); err != nil {
		return err
	}
	if len(pan.Persons) == 0 {
		return Inputf(file, 0, "no person has an observed value of any outcome")
	}
	if len(dropped) > 0 {
		pan.Notes = append(pan.Notes, fmt.Sprintf("%s with no observed value %s left out: %s", plural(len(dropped), "person", "persons"), pick(len(dropped) == 1, "was", "were"), clip(dropped, 5)))
	}
	for j := range pan.Outcomes {
		if err := pan.checkVaries(sp, file, j); err != nil {
			p.add(err)
		}
	}
	return p.err()
}

// occasionGrid returns the occasion grid of the sorted, distinct occasion
// values: from the first to the last by the greatest common divisor of
// their differences, so that equal time between occasions is one lag (a
// wave nobody was asked about is an empty occasion, not a shorter lag).
// A grid that would be mostly empty, more inserted occasions than
// observed ones (one far-off value, say), is refused before it is built.
func occasionGrid(file string, sp *Spec, values []int) ([]int, error) {
	if len(values) < 2 {
		return values, nil
	}
	step := 0
	for _, v := range values[1:] {
		step = gcd(step, v-values[0])
	}
	n := (values[len(values)-1]-values[0])/step + 1 // values lie within ±1e9: no overflow
	if n-len(values) > len(values) {
		what := "occasion values"
		if sp.Data.Wide {
			what = "occasions in the column names"
		}
		return nil, Inputf(file, 0, "the %s (%s) are unevenly spaced: equal spacing needs a grid of %d occasions from %d to %d by steps of %d, %d of them with no answers. If these are consecutive waves, recode them 1, 2, 3, ...; lagstar's carry-over is per step of the grid",
			what, clip(intTexts(values), 8), n, values[0], values[len(values)-1], step, n-len(values))
	}
	grid := make([]int, n)
	for i := range grid {
		grid[i] = values[0] + i*step
	}
	return grid, nil
}

func gcd(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	return max(a, -a)
}

func intTexts(xs []int) []string {
	out := make([]string, len(xs))
	for i, x := range xs {
		out[i] = strconv.Itoa(x)
	}
	return out
}

// plural picks the singular or plural form for a count n, with n in
// front: plural(1, "person", "persons") is "1 person".
func plural(n int, one, many string) string {
	return fmt.Sprintf("%d %s", n, pick(n == 1, one, many))
}

func pick(c bool, a, b string) string {
	if c {
		return a
	}
	return b
}

// checkVaries refuses an outcome that takes a single value, and an ordinal
// or binary outcome with a category nobody used (its threshold would rest
// on nothing but the prior) unless the outcome says empty_categories:
// merge, in which case the empty categories are dropped and the rest
// renumbered.
func (pan *Panel) checkVaries(sp *Spec, file string, j int) error {
	o := &pan.Outcomes[j]
	J := pan.J()
	cells := func(fn func(c int, v float64)) {
		for i := range pan.Persons {
			for t := 0; t < pan.Len[i]; t++ {
				c := pan.Offset[i] + t*J + j
				if v := pan.Y[c]; !math.IsNaN(v) {
					fn(c, v)
				}
			}
		}
	}
	if o.K == 0 {
		first, n, varies := math.NaN(), 0, false
		cells(func(_ int, v float64) {
			if n == 0 {
				first = v
			} else if v != first {
				varies = true
			}
			n++
		})
		if n > 0 && !varies && !sp.AllowDegenerate {
			return Inputf(file, 0, "outcome %q takes the single value %g in all %d observed cells: an outcome that never varies cannot be modelled; leave it out of outcomes", o.Name, first, n)
		}
		return nil
	}
	count := make([]int, o.K)
	cells(func(_ int, v float64) { count[int(v)]++ })
	var empty []string
	used := 0
	for c, n := range count {
		if n == 0 {
			empty = append(empty, o.Codes[c])
		} else {
			used++
		}
	}
	switch {
	case sp.AllowDegenerate:
		if len(empty) > 0 {
			pan.Notes = append(pan.Notes, fmt.Sprintf("outcome %q: category %s never observed; its thresholds rest on the prior", o.Name, strings.Join(empty, ", ")))
		}
		return nil
	case used == 1:
		only := o.Codes[slices.IndexFunc(count, func(n int) bool { return n > 0 })]
		return Inputf(file, 0, "outcome %q takes the single value %q in all %d observed cells: an outcome that never varies cannot be modelled; leave it out of outcomes", o.Name, only, count[slices.Index(o.Codes, only)])
	case len(empty) == 0:
		return nil
	case !sp.Outcomes[j].MergeEmpty:
		return Inputf(file, 0, "outcome %q: category %s never observed (categories %s); a threshold next to an empty category cannot be estimated from the data. Declare the categories that occur, or set empty_categories: merge on the outcome in %s to drop empty categories",
			o.Name, strings.Join(empty, ", "), strings.Join(o.Codes, ", "), sp.Path)
	case o.Type == Ordinal && used < 3:
		return Inputf(file, 0, "outcome %q: only %d categories are observed (%s never); an ordinal outcome needs 3: use type: binary", o.Name, used, strings.Join(empty, ", "))
	}
	newIdx := make([]int, o.K)
	var codes []string
	for c, n := range count {
		newIdx[c] = len(codes)
		if n > 0 {
			codes = append(codes, o.Codes[c])
		}
	}
	cells(func(c int, v float64) { pan.Y[c] = float64(newIdx[int(v)]) })
	pan.Notes = append(pan.Notes, fmt.Sprintf("outcome %q: category %s never observed and dropped (empty_categories: merge); %d categories remain: %s",
		o.Name, strings.Join(empty, ", "), len(codes), strings.Join(codes, ", ")))
	o.K, o.Codes = len(codes), codes
	return nil
}

func codeOf(o Outcome, v string) float64 {
	if o.Type == Continuous {
		f, _ := strconv.ParseFloat(v, 64)
		return f
	}
	if i := slices.Index(o.Codes, v); i >= 0 {
		return float64(i)
	}
	c, _ := parseOccasion(v)
	lo, _ := strconv.Atoi(o.Codes[0])
	return float64(c - lo)
}

// sortPersons orders ids numerically when all are integers, else as text,
// so that results do not depend on the order of rows in the file.
func sortPersons(ids []string) {
	numeric := true
	for _, id := range ids {
		if _, err := strconv.ParseInt(id, 10, 64); err != nil {
			numeric = false
			break
		}
	}
	if numeric {
		// Ids that are the same number written differently (1 and 01, 4
		// and +4) are different persons; the text breaks the tie, so the
		// order is total and the draws do not depend on the map order.
		slices.SortFunc(ids, func(a, b string) int {
			x, _ := strconv.ParseInt(a, 10, 64)
			y, _ := strconv.ParseInt(b, 10, 64)
			if c := cmp.Compare(x, y); c != 0 {
				return c
			}
			return strings.Compare(a, b)
		})
		return
	}
	slices.Sort(ids)
}

// sameNumberIDs returns the groups of person ids (sorted by sortPersons)
// that are one number written differently, e.g. "1, 01".
func sameNumberIDs(ids []string) []string {
	var out []string
	for k := 0; k < len(ids); {
		x, err := strconv.ParseInt(ids[k], 10, 64)
		e := k + 1
		for err == nil && e < len(ids) {
			y, err2 := strconv.ParseInt(ids[e], 10, 64)
			if err2 != nil || y != x {
				break
			}
			e++
		}
		if e-k > 1 {
			out = append(out, strings.Join(ids[k:e], " and "))
		}
		k = e
	}
	return out
}

func clip(xs []string, n int) string {
	if len(xs) <= n {
		return strings.Join(xs, ", ")
	}
	return strings.Join(xs[:n], ", ") + fmt.Sprintf(" and %d more", len(xs)-n)
}
