package compare

import (
	"errors"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"
)

// The format checked here is the one documented at ReadCSV (the project's
// own specification of the measured-data file; common practice, no source).

func TestReadCSVGoodFile(t *testing.T) {
	// Common practice, no source: a header naming the columns, any order,
	// spaces around names and numbers, comments and blank lines anywhere,
	// CRLF line ends, and a column the reader does not use.
	in := "# thermal conductivity, sample 3\r\n" +
		"\r\n" +
		" B_T , note, y[percent] ,T_K, sigma_percent\r\n" +
		"# first sweep\r\n" +
		"0, a, 0 , 2.0, 0.1\r\n" +
		"1.5, b, -3.25, 2, 0.2\r\n" +
		"\r\n" +
		"-2.5e0, c, 1e-1, 4.2, 5E-2\r\n" +
		",,,,\r\n" +
		"0, d, 7, 0.5, 1\r\n"
	d, err := ReadCSV(strings.NewReader(in), "kappa.csv")
	if err != nil {
		t.Fatal(err)
	}
	want := &Data{
		Name:        "kappa.csv",
		Temperature: []float64{2, 2, 4.2, 0.5},
		Field:       []float64{0, 1.5, -2.5, 0},
		Value:       []float64{0, -3.25, 0.1, 7},
		Sigma:       []float64{0.1, 0.2, 0.05, 1},
		ValueUnit:   "percent",
		Lines:       []int{5, 6, 8, 10},
		Ignored:     []string{"note"},
	}
	if !reflect.DeepEqual(d, want) {
		t.Errorf("read\n%+v\nwant\n%+v", d, want)
	}
	if d.Len() != 4 {
		t.Errorf("Len() = %d, want 4", d.Len())
	}
	if got := d.Temperatures(); !slices.Equal(got, []float64{0.5, 2, 4.2}) {
		t.Errorf("Temperatures() = %v, want [0.5 2 4.2]", got)
	}
	if err := d.Validate(); err != nil {
		t.Errorf("Validate of a file that was read: %v", err)
	}
}

func TestReadCSVNoSigmaAndUnits(t *testing.T) {
	// Common practice, no source: the unit of y comes from its header name;
	// without a sigma column Sigma is nil; a byte-order mark is skipped.
	for _, c := range []struct{ header, unit string }{
		{"T_K,B_T,y", "1"},
		{"T_K,B_T,y_percent", "percent"},
		{"T_K,B_T,y[1]", "1"},
		{"T_K,B_T,y [mW/K]", "mW/K"},
		{"\ufeffy_arb,B_T,T_K", "arb"},
	} {
		d, err := ReadCSV(strings.NewReader(c.header+"\n1,2,3\n"), "u.csv")
		if err != nil {
			t.Errorf("%q: %v", c.header, err)
			continue
		}
		if d.ValueUnit != c.unit || d.Sigma != nil || d.Ignored != nil {
			t.Errorf("%q: unit %q, sigma %v, ignored %v; want unit %q, nil, nil", c.header, d.ValueUnit, d.Sigma, d.Ignored, c.unit)
		}
	}
	d, err := ReadCSV(strings.NewReader("T_K,B_T,y[percent],sigma[percent]\n1,2,3,0.5\n"), "u.csv")
	if err != nil || d.ValueUnit != "percent" || !slices.Equal(d.Sigma, []float64{0.5}) {
		t.Errorf("sigma with the unit of y: %+v, %v", d, err)
	}
}

// badCSV is a file ReadCSV must refuse, and the first problem it must name.
type badCSV struct {
	name   string
	in     string
	line   int
	column string
	reason string // a part of the reason
}

// checkBadCSV reads c.in and checks the error: a DataErrors whose first
// entry has the line, column and reason of c, and whose message says
// "bad.csv:LINE: column COLUMN: ".
func checkBadCSV(t *testing.T, c badCSV) {
	t.Helper()
	d, err := ReadCSV(strings.NewReader(c.in), "bad.csv")
	if err == nil {
		t.Fatalf("read %+v, want an error", d)
	}
	var list DataErrors
	if !errors.As(err, &list) || len(list) == 0 {
		t.Fatalf("error %T %v, want a DataErrors", err, err)
	}
	var first *DataError
	if !errors.As(err, &first) || first != list[0] {
		t.Fatalf("errors.As does not find the first DataError in %v", err)
	}
	if first.File != "bad.csv" || first.Line != c.line || first.Column != c.column || !strings.Contains(first.Reason, c.reason) {
		t.Errorf("got %+v, want line %d, column %q, reason containing %q", *first, c.line, c.column, c.reason)
	}
	prefix := "bad.csv"
	if c.line > 0 {
		prefix += ":" + strconv.Itoa(c.line)
	}
	prefix += ": "
	if c.column != "" {
		prefix += "column " + c.column + ": "
	}
	if msg := err.Error(); !strings.HasPrefix(msg, prefix) {
		t.Errorf("message %q does not start with %q", msg, prefix)
	}
}

func TestReadCSVEmptyFile(t *testing.T) {
	checkBadCSV(t, badCSV{in: "", line: 0, reason: "no header line and no data"})
}

func TestReadCSVOnlyComments(t *testing.T) {
	checkBadCSV(t, badCSV{in: "# nothing here\n\n   \n#T_K,B_T,y\n", line: 0, reason: "no header line and no data"})
}

func TestReadCSVHeaderWithoutRows(t *testing.T) {
	checkBadCSV(t, badCSV{in: "# run 1\nT_K,B_T,y\n# no rows\n\n", line: 2, reason: "no data rows after the header"})
}

func TestReadCSVMissingTemperature(t *testing.T) {
	checkBadCSV(t, badCSV{in: "\nT,B_T,y\n1,2,3\n", line: 2, column: "T_K", reason: `missing (the header names "T", "B_T", "y")`})
}

func TestReadCSVMissingField(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,b_t,y\n1,2,3\n", line: 1, column: "B_T", reason: "missing"})
}

func TestReadCSVMissingValue(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,kappa\n1,2,3\n", line: 1, column: "y", reason: "missing"})
}

func TestReadCSVNumbersInsteadOfHeader(t *testing.T) {
	checkBadCSV(t, badCSV{in: "# no header\n1,2,3\n", line: 2, reason: "the first line must be a header"})
}

func TestReadCSVSemicolons(t *testing.T) {
	d, err := ReadCSV(strings.NewReader("T_K;B_T;y\n1;2;3\n"), "bad.csv")
	if err == nil || !strings.Contains(err.Error(), "bad.csv:1: column T_K: missing") ||
		!strings.Contains(err.Error(), "bad.csv:1: the columns must be separated by commas") {
		t.Errorf("read %v, error %v; want a missing T_K and the separator named", d, err)
	}
}

func TestReadCSVDuplicatedColumnName(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,note,B_T,y,note\n1,a,2,3,b\n", line: 1, column: "note", reason: "named twice (columns 2 and 5)"})
}

func TestReadCSVSecondValueColumn(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y,y_percent\n1,2,3,4\n", line: 1, column: "y_percent", reason: `a second y column (the first is "y", column 3)`})
}

func TestReadCSVUnnamedColumn(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y,\n1,2,3,\n", line: 1, reason: "column 4 of the header has no name"})
}

func TestReadCSVSigmaUnitMismatch(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y_percent,sigma[1]\n1,2,3,4\n", line: 1, column: "sigma[1]", reason: `unit "1" differs from the unit of y ("percent")`})
}

func TestReadCSVEmptyUnit(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y_\n1,2,3\n", line: 1, column: "y_", reason: "the unit after '_' is empty"})
}

func TestReadCSVUnclosedUnit(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y[percent\n1,2,3\n", line: 1, column: "y[percent", reason: "no closing ']'"})
}

func TestReadCSVTooFewFields(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y\n1,2,3\n1,2\n", line: 3, reason: "2 fields, the header (line 1) has 3"})
}

func TestReadCSVTooManyFields(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y\n\n1,2,3,4\n", line: 3, reason: "4 fields, the header (line 1) has 3"})
}

func TestReadCSVNotANumber(t *testing.T) {
	// The message of the specification, word for word.
	_, err := ReadCSV(strings.NewReader("T_K,B_T,y\n1,2,3\nabc,2,3\n"), "bad.csv")
	if want := `bad.csv:3: column T_K: "abc" is not a number`; err == nil || err.Error() != want {
		t.Errorf("error %v, want %s", err, want)
	}
}

func TestReadCSVEmptyNumber(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y\n1, ,3\n", line: 2, column: "B_T", reason: "empty field"})
}

func TestReadCSVHexadecimalIsNotANumber(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y\n1,0x1p-2,3\n", line: 2, column: "B_T", reason: `"0x1p-2" is not a number`})
}

func TestReadCSVNaN(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y[1]\n1,2,NaN\n", line: 2, column: "y[1]", reason: "NaN is not allowed"})
}

func TestReadCSVInfinity(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y\n1,-Inf,3\n", line: 2, column: "B_T", reason: `"-Inf" is not a finite number`})
}

func TestReadCSVOutOfRange(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y,sigma\n1,2,3,1e400\n", line: 2, column: "sigma", reason: `"1e400" is not a finite number`})
}

func TestReadCSVZeroTemperature(t *testing.T) {
	checkBadCSV(t, badCSV{in: "B_T,T_K,y\n1,0,3\n", line: 2, column: "T_K", reason: "temperature must be > 0 K, got 0"})
}

func TestReadCSVNegativeTemperature(t *testing.T) {
	checkBadCSV(t, badCSV{in: "B_T,T_K,y\n1,1,3\n1,-1.5,3\n", line: 3, column: "T_K", reason: "temperature must be > 0 K, got -1.5"})
}

func TestReadCSVZeroSigma(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y,sigma_1\n1,2,3,0\n", line: 2, column: "sigma_1", reason: "sigma must be > 0, got 0"})
}

func TestReadCSVNegativeSigma(t *testing.T) {
	checkBadCSV(t, badCSV{in: "T_K,B_T,y,sigma\n1,2,3,-0.1\n", line: 2, column: "sigma", reason: "sigma must be > 0, got -0.1"})
}

func TestReadCSVDuplicatedPoint(t *testing.T) {
	// The point of line 5 is that of line 3 (0 and -0 are one field).
	checkBadCSV(t, badCSV{in: "T_K,B_T,y\n# sweep\n2,0,1\n2,1,2\n2.0,-0,3\n", line: 5, reason: "the point T = 2 K, B = -0 T repeats line 3"})
}

func TestReadCSVSeveralProblems(t *testing.T) {
	// Every problem, in the order of the file; the rows that are sound still
	// count as earlier points.
	in := "T_K,B_T,y\n1,1,x\n0,1,1\n1,1,1\n1,1,2\n"
	_, err := ReadCSV(strings.NewReader(in), "bad.csv")
	var list DataErrors
	if !errors.As(err, &list) {
		t.Fatalf("error %v, want a DataErrors", err)
	}
	want := []string{
		`bad.csv:2: column y: "x" is not a number`,
		`bad.csv:3: column T_K: temperature must be > 0 K, got 0`,
		`bad.csv:5: the point T = 1 K, B = 1 T repeats line 4`,
	}
	var got []string
	for _, e := range list {
		got = append(got, e.Error())
	}
	if !slices.Equal(got, want) {
		t.Errorf("got\n%s\nwant\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
	if err.Error() != strings.Join(want, "; ") {
		t.Errorf("message %q", err.Error())
	}
}

func TestReadCSVManyProblemsAreCut(t *testing.T) {
	var b strings.Builder
	b.WriteString("T_K,B_T,y\n")
	for i := range 50 {
		b.WriteString("-1," + strconv.Itoa(i) + ",0\n")
	}
	_, err := ReadCSV(strings.NewReader(b.String()), "bad.csv")
	var list DataErrors
	if !errors.As(err, &list) || len(list) != maxDataErrors+1 {
		t.Fatalf("error %v: want %d entries and one more", err, maxDataErrors)
	}
	if last := list[maxDataErrors]; last.Line != 0 || last.Reason != "and 30 more problems" {
		t.Errorf("last entry %+v, want \"and 30 more problems\"", *last)
	}
	if list[maxDataErrors-1].Line != maxDataErrors+1 {
		t.Errorf("entry %d is of line %d, want %d", maxDataErrors, list[maxDataErrors-1].Line, maxDataErrors+1)
	}
}

func TestReadCSVReadFailure(t *testing.T) {
	failure := errors.New("disk on fire")
	_, err := ReadCSV(iotest.ErrReader(failure), "r.csv")
	if !errors.Is(err, failure) || !strings.HasPrefix(err.Error(), "r.csv: ") {
		t.Errorf("error %v, want the read failure, prefixed with the name", err)
	}
}

func TestLoadCSV(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.csv")
	if err := os.WriteFile(good, []byte("T_K,B_T,y\n1.8,3,0.25\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	d, err := LoadCSV(good)
	if err != nil || d.Name != good || d.Len() != 1 || d.Value[0] != 0.25 {
		t.Errorf("LoadCSV: %+v, %v", d, err)
	}
	bad := filepath.Join(dir, "bad.csv")
	if err := os.WriteFile(bad, []byte("T_K,B_T,y\n1.8,3,zero\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := LoadCSV(bad); err == nil || err.Error() != bad+`:2: column y: "zero" is not a number` {
		t.Errorf("LoadCSV of a bad file: %v", err)
	}
	if _, err := LoadCSV(filepath.Join(dir, "none.csv")); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("LoadCSV of a missing file: %v, want fs.ErrNotExist", err)
	}
}

// goodData is valid Data as code would build it from a MeasuredData message.
func goodData() *Data {
	return &Data{
		Name:        "run 7",
		Temperature: []float64{1, 1, 2, 2},
		Field:       []float64{0, 5, 0, 5},
		Value:       []float64{0, -0.1, 0, -0.05},
		Sigma:       []float64{0.01, 0.01, 0.02, 0.02},
		ValueUnit:   "1",
	}
}

func TestValidateGood(t *testing.T) {
	d := goodData()
	if err := d.Validate(); err != nil {
		t.Errorf("Validate: %v", err)
	}
	d.Sigma = nil
	if err := d.Validate(); err != nil {
		t.Errorf("Validate without sigma: %v", err)
	}
	d.Sigma = []float64{}
	if err := d.Validate(); err != nil {
		t.Errorf("Validate with an empty sigma: %v", err)
	}
}

// checkBadData checks that Validate refuses d with a first entry naming
// column (a MeasuredData path) and the reason, and no line.
func checkBadData(t *testing.T, d *Data, column, reason string) {
	t.Helper()
	err := d.Validate()
	var first *DataError
	if !errors.As(err, &first) {
		t.Fatalf("Validate: %v, want a DataError", err)
	}
	if first.Line != 0 || first.Column != column || !strings.Contains(first.Reason, reason) {
		t.Errorf("got %+v, want column %q, reason containing %q", *first, column, reason)
	}
	prefix := ""
	if d != nil {
		prefix = d.Name + ": "
	}
	if column != "" {
		prefix += column + ": "
	}
	if !strings.HasPrefix(err.Error(), prefix) {
		t.Errorf("message %q does not start with %q", err.Error(), prefix)
	}
}

func TestValidateNil(t *testing.T) {
	checkBadData(t, nil, "", "no data")
}

func TestValidateEmpty(t *testing.T) {
	checkBadData(t, &Data{Name: "run 7"}, "temperature", "no data points")
}

func TestValidateFieldLength(t *testing.T) {
	d := goodData()
	d.Field = d.Field[:3]
	checkBadData(t, d, "field", "3 values, temperature has 4")
}

func TestValidateValueLength(t *testing.T) {
	d := goodData()
	d.Value = append(d.Value, 1)
	checkBadData(t, d, "value", "5 values, temperature has 4")
}

func TestValidateSigmaLength(t *testing.T) {
	d := goodData()
	d.Sigma = d.Sigma[:1]
	checkBadData(t, d, "sigma", "1 values, temperature has 4 (give none or one per point)")
}

func TestValidateLinesLength(t *testing.T) {
	d := goodData()
	d.Lines = []int{1, 2}
	checkBadData(t, d, "lines", "2 values, temperature has 4")
}

func TestValidateNaN(t *testing.T) {
	d := goodData()
	d.Temperature[3] = math.NaN()
	checkBadData(t, d, "temperature[3]", "NaN is not allowed")
}

func TestValidateInfinity(t *testing.T) {
	d := goodData()
	d.Value[1] = math.Inf(-1)
	checkBadData(t, d, "value[1]", `"-Inf" is not a finite number`)
}

func TestValidateSigmaNaN(t *testing.T) {
	d := goodData()
	d.Sigma[2] = math.NaN()
	checkBadData(t, d, "sigma[2]", "NaN is not allowed")
}

func TestValidateTemperature(t *testing.T) {
	d := goodData()
	d.Temperature[2] = -1
	checkBadData(t, d, "temperature[2]", "temperature must be > 0 K, got -1")
}

func TestValidateSigma(t *testing.T) {
	d := goodData()
	d.Sigma[0] = 0
	checkBadData(t, d, "sigma[0]", "sigma must be > 0, got 0")
}

func TestValidateDuplicatedPoint(t *testing.T) {
	d := goodData()
	d.Field[3] = 0
	checkBadData(t, d, "temperature[3], field[3]", "the point T = 2 K, B = 0 T repeats point 2")
}

func TestValidateSeveralProblems(t *testing.T) {
	d := goodData()
	d.Temperature[0] = 0
	d.Value[2] = math.NaN()
	d.Sigma[3] = -1
	want := "run 7: temperature[0]: temperature must be > 0 K, got 0; run 7: value[2]: NaN is not allowed; run 7: sigma[3]: sigma must be > 0, got -1"
	if err := d.Validate(); err == nil || err.Error() != want {
		t.Errorf("Validate: %v\nwant %s", err, want)
	}
}

func TestDataErrorMessage(t *testing.T) {
	// Common practice, no source: "file:line: " as compilers write it.
	for _, c := range []struct {
		e    DataError
		want string
	}{
		{DataError{"a.csv", 3, "T_K", "bad"}, "a.csv:3: column T_K: bad"},
		{DataError{"a.csv", 3, "", "bad"}, "a.csv:3: bad"},
		{DataError{"", 3, "T_K", "bad"}, "line 3: column T_K: bad"},
		{DataError{"run", 0, "field[2]", "bad"}, "run: field[2]: bad"},
		{DataError{"", 0, "", "bad"}, "bad"},
	} {
		if got := c.e.Error(); got != c.want {
			t.Errorf("%+v: %q, want %q", c.e, got, c.want)
		}
	}
}

func FuzzReadCSV(f *testing.F) {
	// Common practice, no source: a reader never panics, and what it accepts
	// passes the checks of Data built in code, point by point in file order.
	for _, seed := range []string{
		"T_K,B_T,y\n1,2,3\n",
		"# c\n B_T , y[percent], T_K, sigma_percent, x\r\n0,1,2,0.1,a\n1,2,2,0.2,b\n",
		"T_K,B_T,y\n1,2\n",
		"T_K,B_T,y,sigma\n1,2,3,0\n-1,2,3,1\n1,2,NaN,1\n1,2,3,1\n",
		"\ufeffy_,T_K\n",
		"",
		",,,\n",
	} {
		f.Add(seed)
	}
	f.Fuzz(func(t *testing.T, in string) {
		d, err := ReadCSV(strings.NewReader(in), "fuzz.csv")
		if err != nil {
			var de *DataError
			if d != nil || !errors.As(err, &de) || err.Error() == "" {
				t.Fatalf("refused with data %v and error %T %v", d, err, err)
			}
			return
		}
		if err := d.Validate(); err != nil {
			t.Fatalf("read data fail Validate: %v\n%q", err, in)
		}
		if d.Len() == 0 || len(d.Lines) != d.Len() || !slices.IsSorted(d.Lines) || d.ValueUnit == "" {
			t.Fatalf("read data inconsistent: %+v", d)
		}
		if d.Sigma != nil && len(d.Sigma) != d.Len() {
			t.Fatalf("sigma of %d for %d points", len(d.Sigma), d.Len())
		}
	})
}
