package grid

import (
	"errors"
	"math"
	"strings"
	"testing"
)

func TestParse(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want []float64
	}{
		{"5", []float64{5}},
		{" -2.5 ", []float64{-2.5}},
		{"1e-3", []float64{0.001}},
		{"1,2,5", []float64{1, 2, 5}},
		{"5, 2 ,1", []float64{5, 2, 1}},
		{"-1,0,0", []float64{-1, 0, 0}},
		{"0:15:4", []float64{0, 5, 10, 15}},
		{"0:1:2", []float64{0, 1}},
		{"15:0:4", []float64{15, 10, 5, 0}},
		{"-1:1:5", []float64{-1, -0.5, 0, 0.5, 1}},
		{" 0 : 15 : 4 ", []float64{0, 5, 10, 15}},
		{"log:1:1000:4", []float64{1, 10, 100, 1000}},
		{"LOG:1000:1:4", []float64{1000, 100, 10, 1}},
	} {
		got, err := Parse(tc.in)
		if err != nil {
			t.Errorf("Parse(%q): %v", tc.in, err)
			continue
		}
		if len(got) != len(tc.want) {
			t.Errorf("Parse(%q) = %v, want %v", tc.in, got, tc.want)
			continue
		}
		for i := range got {
			if math.Abs(got[i]-tc.want[i]) > 1e-12*math.Max(1, math.Abs(tc.want[i])) {
				t.Errorf("Parse(%q)[%d] = %v, want %v", tc.in, i, got[i], tc.want[i])
			}
		}
	}
}

func TestParseRangeEndsExact(t *testing.T) {
	for _, in := range []string{"0:15:61", "0.1:0.7:7", "log:0.5:300:100", "log:0.03:7.7:13", "-3.3:7.1:9"} {
		got, err := Parse(in)
		if err != nil {
			t.Fatalf("Parse(%q): %v", in, err)
		}
		parts := strings.Split(strings.TrimPrefix(in, "log:"), ":")
		first, _ := number(parts[0])
		last, _ := number(parts[1])
		n, _ := count(parts[2])
		if len(got) != n {
			t.Errorf("Parse(%q): %d points, want %d", in, len(got), n)
		}
		if got[0] != first || got[len(got)-1] != last {
			t.Errorf("Parse(%q): ends %v, %v; want exactly %v, %v", in, got[0], got[len(got)-1], first, last)
		}
		for i := 1; i < len(got); i++ {
			if !(got[i] > got[i-1]) {
				t.Errorf("Parse(%q): not increasing at %d: %v, %v", in, i, got[i-1], got[i])
			}
		}
	}
}

func TestParseLinearSpacing(t *testing.T) {
	got, err := Parse("0:15:61")
	if err != nil {
		t.Fatal(err)
	}
	for i, v := range got {
		if want := 0.25 * float64(i); math.Abs(v-want) > 1e-13 {
			t.Errorf("point %d = %v, want %v", i, v, want)
		}
	}
}

func TestParseLogSpacing(t *testing.T) {
	got, err := Parse("log:0.5:300:100")
	if err != nil {
		t.Fatal(err)
	}
	ratio := math.Pow(300/0.5, 1.0/99)
	for i := 1; i < len(got); i++ {
		if r := got[i] / got[i-1]; math.Abs(r-ratio) > 1e-12 {
			t.Errorf("ratio at %d = %v, want %v", i, r, ratio)
		}
	}
}

func TestParseErrors(t *testing.T) {
	for _, tc := range []struct {
		in, reason string
	}{
		{"", "empty grid"},
		{"   ", "empty grid"},
		{"abc", `"abc" is not a number`},
		{"1,,2", "item 2: missing number"},
		{"1,2,", "item 3: missing number"},
		{"1,two,3", `item 2: "two" is not a number`},
		{"NaN", "not a finite number"},
		{"1,inf", "item 2: \"inf\" is not a finite number"},
		{"-Inf:0:3", "range start: \"-Inf\" is not a finite number"},
		{"1e400", "out of range"},
		{"0x10", "not a number"},
		{"0x1p4", "not a decimal number"},
		{"1_000", "not a decimal number"},
		{"0:15:1", "at least 2 points, got 1"},
		{"0:15:0", "at least 2 points, got 0"},
		{"0:15:-4", "at least 2 points, got -4"},
		{"0:15:6.5", "whole number"},
		{"0:15:many", `"many" is not a number of points`},
		{"0:15:", "missing number of points"},
		{"0:15", "START:END:COUNT"},
		{"0:1:2:3", "got 4 parts"},
		{"3:3:5", "both 3"},
		{"0:15:2000000", "more than the 1000000 allowed"},
		{"0:15:99999999999999999999", "more than the 1000000 allowed"},
		{"log:0:300:100", "both ends > 0"},
		{"log:-1:300:100", "both ends > 0"},
		{"log:1:-300:100", "both ends > 0"},
		{"log:1:300", "log:START:END:COUNT"},
		{"log:1:300:1", "at least 2 points"},
		{"1,2:3:4", "not both"},
	} {
		_, err := Parse(tc.in)
		if err == nil {
			t.Errorf("Parse(%q): no error, want one containing %q", tc.in, tc.reason)
			continue
		}
		var ge *Error
		if !errors.As(err, &ge) || ge.Input != tc.in {
			t.Errorf("Parse(%q): error %#v is not a *grid.Error with the input", tc.in, err)
		}
		if !strings.Contains(err.Error(), tc.reason) {
			t.Errorf("Parse(%q): error %q does not contain %q", tc.in, err, tc.reason)
		}
	}
}

func TestParseVector(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want [3]float64
	}{
		{"0,0,1", [3]float64{0, 0, 1}},
		{"-1,0,0", [3]float64{-1, 0, 0}},
		{" 1.5 , -2e1 ,3 ", [3]float64{1.5, -20, 3}},
	} {
		got, err := ParseVector(tc.in)
		if err != nil || got != tc.want {
			t.Errorf("ParseVector(%q) = %v, %v; want %v", tc.in, got, err, tc.want)
		}
	}
	for _, tc := range []struct {
		in, reason string
	}{
		{"", "got 0"},
		{"1", "got 1"},
		{"1,2", "got 2"},
		{"1,2,3,4", "got 4"},
		{"0:1:3", "got 1"},
		{"1,x,3", `component 2: "x" is not a number`},
		{"1,2,NaN", "component 3"},
		{"1,,3", "component 2: missing number"},
	} {
		_, err := ParseVector(tc.in)
		if err == nil || !strings.Contains(err.Error(), tc.reason) {
			t.Errorf("ParseVector(%q): error %v, want one containing %q", tc.in, err, tc.reason)
		}
	}
}

func TestLinearLogPanic(t *testing.T) {
	for name, f := range map[string]func(){
		"Linear n=1": func() { Linear(0, 1, 1) },
		"Log n=1":    func() { Log(1, 2, 1) },
		"Log zero":   func() { Log(0, 2, 3) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
}

func FuzzParse(f *testing.F) {
	for _, s := range []string{"1,2,5", "0:15:61", "log:0.5:300:100", "-1,0,0", "5", "1e-3:2:3"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		pts, err := Parse(s)
		if err != nil {
			return
		}
		if len(pts) == 0 || len(pts) > MaxPoints {
			t.Fatalf("Parse(%q): %d points", s, len(pts))
		}
		for _, v := range pts {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("Parse(%q): non-finite point %v", s, v)
			}
		}
	})
}
