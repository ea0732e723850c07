package compare

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
)

// Data is a set of measured points y(B, T): parallel arrays, one entry per
// point, in the order of the file.
type Data struct {
	// Name names the data in messages: the file name for LoadCSV.
	Name string
	// Temperature in K (each > 0), Field in T (the field along the
	// measurement direction, of either sign), Value the measured y in
	// ValueUnit.
	Temperature, Field, Value []float64
	// Sigma is the standard error of each value (> 0, in ValueUnit); nil
	// when the data carry none.
	Sigma []float64
	// ValueUnit is the unit of Value as the header gave it; "1" when none.
	ValueUnit string
	// Lines is the file line (1-based) of each point; nil for Data built in
	// code.
	Lines []int
	// Ignored names the header's other columns, which were not read.
	Ignored []string
}

// Len returns the number of points.
func (d *Data) Len() int { return len(d.Temperature) }

// Temperatures returns the distinct temperatures of the points, ascending.
func (d *Data) Temperatures() []float64 {
	t := slices.Clone(d.Temperature)
	slices.Sort(t)
	return slices.Compact(t)
}

// DataError says what is wrong with one place of measured data. From a file
// (ReadCSV), Line is the 1-based line and Column the column's name as the
// header spells it:
//
//	kappa.csv:12: column T_K: "abc" is not a number
//
// From Validate, Line is 0 and Column is the field path of the MeasuredData
// message, for example "temperature[3]":
//
//	run 7: temperature[3]: temperature must be > 0 K, got -1
//
// Column is empty when the problem is the line or the data as a whole.
type DataError struct {
	File   string
	Line   int
	Column string
	Reason string
}

// Error returns "FILE:LINE: column COLUMN: REASON" for a file, and "FILE:
// COLUMN: REASON" for Data built in code, leaving out the parts that are
// empty.
func (e *DataError) Error() string {
	var b strings.Builder
	switch {
	case e.Line > 0 && e.File != "":
		fmt.Fprintf(&b, "%s:%d: ", e.File, e.Line)
	case e.Line > 0:
		fmt.Fprintf(&b, "line %d: ", e.Line)
	case e.File != "":
		b.WriteString(e.File + ": ")
	}
	if e.Column != "" {
		if e.Line > 0 {
			b.WriteString("column ")
		}
		b.WriteString(e.Column + ": ")
	}
	b.WriteString(e.Reason)
	return b.String()
}

// DataErrors is every problem found in one set of data, in the order of the
// file (ReadCSV) or of the points (Validate). ReadCSV, LoadCSV and Validate
// return a DataErrors (never empty) when they refuse data; errors.As with a
// *DataError finds its first entry. A list longer than 20 is cut there, and
// one last entry with Line 0 and no Column says how many more there were.
type DataErrors []*DataError

// Error joins the entries with "; ".
func (es DataErrors) Error() string {
	parts := make([]string, len(es))
	for i, e := range es {
		parts[i] = e.Error()
	}
	return strings.Join(parts, "; ")
}

// Unwrap returns the entries, so that errors.As and errors.Is see each one.
func (es DataErrors) Unwrap() []error {
	out := make([]error, len(es))
	for i, e := range es {
		out[i] = e
	}
	return out
}

// maxDataErrors bounds the entries of a DataErrors.
const maxDataErrors = 20

// dataProblems collects DataErrors up to maxDataErrors and counts the rest.
type dataProblems struct {
	file string
	list DataErrors
	more int
}

func (p *dataProblems) add(line int, column, reason string) {
	if len(p.list) == maxDataErrors {
		p.more++
		return
	}
	p.list = append(p.list, &DataError{File: p.file, Line: line, Column: column, Reason: reason})
}

func (p *dataProblems) empty() bool { return len(p.list) == 0 }

// err returns the problems as a DataErrors, or nil when there are none.
func (p *dataProblems) err() error {
	if len(p.list) == 0 {
		return nil
	}
	list := p.list
	if p.more > 0 {
		list = append(slices.Clone(list), &DataError{File: p.file, Reason: fmt.Sprintf("and %d more problems", p.more)})
	}
	return list
}

// The quantities of a point, for the checks that ReadCSV and Validate share.
const (
	dataT = iota
	dataB
	dataY
	dataSigma
)

// dataProtoNames are the MeasuredData field names of the quantities.
var dataProtoNames = [...]string{dataT: "temperature", dataB: "field", dataY: "value", dataSigma: "sigma"}

// dataFiniteReason returns why v is refused as a number ("" when it is
// finite); text is how the number was written.
func dataFiniteReason(v float64, text string) string {
	switch {
	case math.IsNaN(v):
		return "NaN is not allowed"
	case math.IsInf(v, 0):
		return strconv.Quote(text) + " is not a finite number"
	}
	return ""
}

// dataPointChecks holds the checks of finite points that ReadCSV and
// Validate share: T > 0, sigma > 0, and no (T, B) twice.
type dataPointChecks struct {
	seen map[[2]float64]int
}

// dataPointProblem is one failed check: the quantity blamed (-1 for the
// point as a whole), the reason, and for a repeated point the id of the
// earlier one (else -1).
type dataPointProblem struct {
	quantity int
	reason   string
	earlier  int
}

// check checks the point with the given id (its file line or its index);
// sigma is ignored unless hasSigma.
func (c *dataPointChecks) check(id int, T, B, sigma float64, hasSigma bool) []dataPointProblem {
	var out []dataPointProblem
	if !(T > 0) {
		out = append(out, dataPointProblem{dataT, "temperature must be > 0 K, got " + dataNumber(T), -1})
	}
	if hasSigma && !(sigma > 0) {
		out = append(out, dataPointProblem{dataSigma, "sigma must be > 0, got " + dataNumber(sigma), -1})
	}
	if c.seen == nil {
		c.seen = map[[2]float64]int{}
	}
	// +0 and -0 are one map key, as they are one field.
	key := [2]float64{T, B}
	if j, ok := c.seen[key]; ok {
		out = append(out, dataPointProblem{-1, fmt.Sprintf("the point T = %s K, B = %s T", dataNumber(T), dataNumber(B)), j})
	} else {
		c.seen[key] = id
	}
	return out
}

func dataNumber(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// Validate checks Data built in code, for example from the MeasuredData
// message, with the rules of ReadCSV: at least one point, parallel arrays of
// one length (Sigma and Lines may be empty), finite numbers, temperatures and
// sigmas > 0, and no (T, B) point twice. It returns a DataErrors whose
// entries have Line 0 and name the MeasuredData field, for example
// "temperature[3]".
func (d *Data) Validate() error {
	p := &dataProblems{}
	if d == nil {
		p.add(0, "", "no data")
		return p.err()
	}
	p.file = d.Name
	n := len(d.Temperature)
	if n == 0 {
		p.add(0, "temperature", "no data points")
	}
	lengths := []struct {
		name     string
		n        int
		optional bool
	}{{"field", len(d.Field), false}, {"value", len(d.Value), false}, {"sigma", len(d.Sigma), true}, {"lines", len(d.Lines), true}}
	for _, l := range lengths {
		if l.n != n && !(l.optional && l.n == 0) {
			reason := fmt.Sprintf("%d values, temperature has %d", l.n, n)
			if l.optional {
				reason += " (give none or one per point)"
			}
			p.add(0, l.name, reason)
		}
	}
	if !p.empty() {
		return p.err()
	}
	hasSigma := len(d.Sigma) > 0
	var checks dataPointChecks
	for i := range n {
		vals := [...]float64{dataT: d.Temperature[i], dataB: d.Field[i], dataY: d.Value[i], dataSigma: math.NaN()}
		last := dataY
		if hasSigma {
			vals[dataSigma] = d.Sigma[i]
			last = dataSigma
		}
		finite := true
		for q := dataT; q <= last; q++ {
			if r := dataFiniteReason(vals[q], dataNumber(vals[q])); r != "" {
				p.add(0, fmt.Sprintf("%s[%d]", dataProtoNames[q], i), r)
				finite = false
			}
		}
		if !finite {
			continue
		}
		for _, pr := range checks.check(i, vals[dataT], vals[dataB], vals[dataSigma], hasSigma) {
			if pr.quantity < 0 {
				p.add(0, fmt.Sprintf("temperature[%d], field[%d]", i, i), fmt.Sprintf("%s repeats point %d", pr.reason, pr.earlier))
				continue
			}
			p.add(0, fmt.Sprintf("%s[%d]", dataProtoNames[pr.quantity], i), pr.reason)
		}
	}
	return p.err()
}

// LoadCSV reads measured data from the CSV file at path (see ReadCSV); the
// Data and its errors are named by path.
func LoadCSV(path string) (*Data, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadCSV(f, path)
}

// ReadCSV reads measured data from comma-separated text. name names the data
// (Data.Name) and the file in error messages.
//
// The first line that is neither blank nor a comment is the header, naming
// the columns; they may come in any order:
//
//	T_K        temperature in K, > 0                       (required)
//	B_T        field in T                                  (required)
//	y          the measured value, in the unit the header  (required)
//	           gives: y, y_UNIT or y[UNIT] (y_percent, y[1]);
//	           Data.ValueUnit is that unit, "1" when none
//	sigma      the standard error of y, > 0                (optional)
//	           sigma, sigma_UNIT or sigma[UNIT]; a unit given must be y's
//
// Other columns are skipped and listed in Data.Ignored. Every row has one
// field per column; fields and names are trimmed of surrounding spaces.
// Numbers are decimal ("1", "-0.5", "2.5e-3"). Blank lines, lines of only
// commas, and lines whose first non-space character is '#' are skipped
// anywhere; a UTF-8 byte-order mark at the start is skipped. There is no
// quoting.
//
// It refuses, with a DataErrors that names the line and column of each
// problem: an empty file or one without data rows, a header without T_K, B_T
// or y, with an unnamed or repeated column, a row with the wrong number of
// fields, a field that is not a number, NaN or infinite, a temperature <= 0,
// a sigma <= 0, and a point with the T and B of an earlier line (naming both
// lines). A failure to read r is returned as it is, prefixed with name.
func ReadCSV(r io.Reader, name string) (*Data, error) {
	p := &dataProblems{file: name}
	d := &Data{Name: name}
	br := bufio.NewReader(r)
	var (
		layout *dataLayout
		checks dataPointChecks
		lineNo int
	)
	for {
		text, err := br.ReadString('\n')
		if err != nil && !errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		if text == "" && err != nil {
			break
		}
		lineNo++
		if lineNo == 1 {
			text = strings.TrimPrefix(text, "\ufeff")
		}
		fields, skip := dataSplitLine(text)
		switch {
		case skip:
		case layout == nil:
			layout = dataReadHeader(fields, lineNo, p)
			if layout == nil {
				return nil, p.err()
			}
			d.ValueUnit, d.Ignored = layout.valueUnit, layout.ignored
		default:
			layout.row(d, fields, lineNo, &checks, p)
		}
		if err != nil {
			break
		}
	}
	switch {
	case layout == nil:
		p.add(0, "", "no header line and no data (the header names the columns T_K, B_T, y)")
	case d.Len() == 0 && p.empty():
		p.add(layout.line, "", "no data rows after the header")
	}
	if err := p.err(); err != nil {
		return nil, err
	}
	return d, nil
}

// dataSplitLine splits a line at its commas and trims the fields; skip says
// the line is blank, a comment or only commas.
func dataSplitLine(text string) (fields []string, skip bool) {
	text = strings.TrimRight(text, "\r\n")
	trimmed := strings.TrimSpace(text)
	if trimmed == "" || trimmed[0] == '#' {
		return nil, true
	}
	fields = strings.Split(text, ",")
	skip = true
	for i, f := range fields {
		fields[i] = strings.TrimSpace(f)
		skip = skip && fields[i] == ""
	}
	return fields, skip
}

// dataLayout is where a header put the columns (-1: absent).
type dataLayout struct {
	line                 int
	names                []string
	t, b, y, sigma       int
	valueUnit, sigmaUnit string
	ignored              []string
}

// dataRole tells whether a header name is base, base_UNIT or base[UNIT];
// bad is the reason a name of that form is refused.
func dataRole(name, base string) (is bool, unit, bad string) {
	if name == base {
		return true, "", ""
	}
	rest, ok := strings.CutPrefix(name, base)
	if !ok {
		return false, "", ""
	}
	if u, ok := strings.CutPrefix(rest, "_"); ok {
		if u = strings.TrimSpace(u); u == "" {
			return true, "", "the unit after '_' is empty"
		}
		return true, u, ""
	}
	if u, ok := strings.CutPrefix(strings.TrimLeft(rest, " "), "["); ok {
		u, closed := strings.CutSuffix(u, "]")
		switch {
		case !closed:
			return true, "", "the unit has no closing ']'"
		case strings.TrimSpace(u) == "":
			return true, "", "the unit in [] is empty"
		}
		return true, strings.TrimSpace(u), ""
	}
	return false, "", ""
}

// dataReadHeader reads the header line; it returns nil after adding its
// problems to p.
func dataReadHeader(names []string, line int, p *dataProblems) *dataLayout {
	l := &dataLayout{line: line, names: names, t: -1, b: -1, y: -1, sigma: -1}
	first := map[string]int{}
	var ignored []string
	claim := func(slot *int, i int, what string) {
		if *slot >= 0 {
			p.add(line, names[i], fmt.Sprintf("a second %s column (the first is %q, column %d)", what, names[*slot], *slot+1))
			return
		}
		*slot = i
	}
	for i, n := range names {
		if n == "" {
			p.add(line, "", fmt.Sprintf("column %d of the header has no name", i+1))
			continue
		}
		if j, ok := first[n]; ok {
			p.add(line, n, fmt.Sprintf("named twice (columns %d and %d)", j+1, i+1))
			continue
		}
		first[n] = i
		if n == "T_K" {
			claim(&l.t, i, "T_K")
			continue
		}
		if n == "B_T" {
			claim(&l.b, i, "B_T")
			continue
		}
		if is, unit, bad := dataRole(n, "y"); is {
			if bad != "" {
				p.add(line, n, bad)
				continue
			}
			if l.y < 0 {
				l.valueUnit = unit
			}
			claim(&l.y, i, "y")
			continue
		}
		if is, unit, bad := dataRole(n, "sigma"); is {
			if bad != "" {
				p.add(line, n, bad)
				continue
			}
			if l.sigma < 0 {
				l.sigmaUnit = unit
			}
			claim(&l.sigma, i, "sigma")
			continue
		}
		ignored = append(ignored, n)
	}
	if l.valueUnit == "" {
		l.valueUnit = "1"
	}
	if l.sigma >= 0 && l.sigmaUnit != "" && l.sigmaUnit != l.valueUnit {
		p.add(line, names[l.sigma], fmt.Sprintf("unit %q differs from the unit of y (%q)", l.sigmaUnit, l.valueUnit))
	}
	missing := []string{}
	for _, c := range []struct {
		slot int
		name string
	}{{l.t, "T_K"}, {l.b, "B_T"}, {l.y, "y"}} {
		if c.slot < 0 {
			missing = append(missing, c.name)
		}
	}
	if len(missing) > 0 && p.empty() && dataAllNumbers(names) {
		p.add(line, "", "the first line must be a header naming the columns (T_K, B_T, y, optional sigma), not numbers")
		return nil
	}
	for _, m := range missing {
		p.add(line, m, fmt.Sprintf("missing (the header names %s)", dataQuotedList(names)))
	}
	if len(names) == 1 && strings.ContainsAny(names[0], ";\t") {
		p.add(line, "", "the columns must be separated by commas")
	}
	if !p.empty() {
		return nil
	}
	l.ignored = ignored
	return l
}

func dataAllNumbers(fields []string) bool {
	for _, f := range fields {
		if _, err := strconv.ParseFloat(f, 64); err != nil {
			return false
		}
	}
	return true
}

func dataQuotedList(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = strconv.Quote(n)
	}
	return strings.Join(q, ", ")
}

// row reads one data row into d, or adds its problems to p.
func (l *dataLayout) row(d *Data, fields []string, line int, checks *dataPointChecks, p *dataProblems) {
	if len(fields) != len(l.names) {
		p.add(line, "", fmt.Sprintf("%d fields, the header (line %d) has %d", len(fields), l.line, len(l.names)))
		return
	}
	cols := [...]int{dataT: l.t, dataB: l.b, dataY: l.y, dataSigma: l.sigma}
	var vals [4]float64
	ok := true
	for q, c := range cols {
		if c < 0 {
			continue
		}
		v, reason := dataParseNumber(fields[c])
		if reason != "" {
			p.add(line, l.names[c], reason)
			ok = false
		}
		vals[q] = v
	}
	if !ok {
		return
	}
	hasSigma := l.sigma >= 0
	failed := false
	for _, pr := range checks.check(line, vals[dataT], vals[dataB], vals[dataSigma], hasSigma) {
		failed = true
		if pr.quantity < 0 {
			p.add(line, "", fmt.Sprintf("%s repeats line %d", pr.reason, pr.earlier))
			continue
		}
		p.add(line, l.names[cols[pr.quantity]], pr.reason)
	}
	if failed {
		return
	}
	d.Temperature = append(d.Temperature, vals[dataT])
	d.Field = append(d.Field, vals[dataB])
	d.Value = append(d.Value, vals[dataY])
	if hasSigma {
		d.Sigma = append(d.Sigma, vals[dataSigma])
	}
	d.Lines = append(d.Lines, line)
}

// dataParseNumber reads a decimal number ("1", "-0.5", "2.5e-3", "+.5"); the
// reason is "" when it is one and finite.
func dataParseNumber(s string) (float64, string) {
	if s == "" {
		return 0, "empty field (no number)"
	}
	v, err := strconv.ParseFloat(s, 64)
	lower := strings.ToLower(strings.TrimLeft(s, "+-"))
	switch {
	case err == nil && (math.IsNaN(v) || math.IsInf(v, 0)):
		return 0, dataFiniteReason(v, s)
	case errors.Is(err, strconv.ErrRange) && math.IsInf(v, 0):
		return 0, dataFiniteReason(v, s)
	case err != nil || strings.ContainsAny(lower, "_xp"):
		// ParseFloat also reads hexadecimal ("0x1p-2") and digits with
		// underscores, which a data file does not mean.
		return 0, strconv.Quote(s) + " is not a number"
	}
	return v, ""
}
