// Package grid parses the point grids and vectors of the command line.
//
// A grid is one of
//
//	5                  a single number
//	1,2,5              a list, in the order given
//	0:15:61            61 points from 0 to 15, evenly spaced, both ends included
//	log:0.5:300:100    100 points from 0.5 to 300, evenly spaced in log, both ends included
//
// Numbers are decimal and may be negative (-1,0,0) or use an exponent (1e-3);
// NaN and infinities are refused. A range needs at least two points and may
// run downwards (15:0:61). Spaces around items are ignored.
//
// A vector (ParseVector) is exactly three numbers separated by commas, such as
// a field Bx,By,Bz or a direction x,y,z.
package grid

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// MaxPoints is the largest number of points a range may ask for.
const MaxPoints = 1_000_000

// Error reports a grid or vector that cannot be parsed: Input is the whole
// text, Reason says what is wrong with it.
type Error struct {
	Input  string
	Reason string
}

func (e *Error) Error() string {
	return fmt.Sprintf("%q: %s", e.Input, e.Reason)
}

// Parse returns the points of a grid written in one of the forms of the
// package documentation.
func Parse(s string) ([]float64, error) {
	fail := func(format string, args ...any) ([]float64, error) {
		return nil, &Error{Input: s, Reason: fmt.Sprintf(format, args...)}
	}
	t := strings.TrimSpace(s)
	if t == "" {
		return fail("empty grid: give a number, a list 1,2,5, a range 0:15:61 or log:0.5:300:100")
	}
	if strings.Contains(t, ":") {
		if strings.Contains(t, ",") {
			return fail("a grid is either a list (1,2,5) or a range (0:15:61), not both")
		}
		parts := strings.Split(t, ":")
		logScale := strings.EqualFold(strings.TrimSpace(parts[0]), "log")
		if logScale {
			parts = parts[1:]
		}
		if len(parts) != 3 {
			if logScale {
				return fail("a logarithmic range is log:START:END:COUNT, got %d parts after log:", len(parts))
			}
			return fail("a range is START:END:COUNT (or log:START:END:COUNT), got %d parts", len(parts))
		}
		start, err := number(parts[0])
		if err != nil {
			return fail("range start: %v", err)
		}
		end, err := number(parts[1])
		if err != nil {
			return fail("range end: %v", err)
		}
		n, err := count(parts[2])
		if err != nil {
			return fail("range count: %v", err)
		}
		if start == end {
			return fail("range start and end are both %s; give a single number instead", strconv.FormatFloat(start, 'g', -1, 64))
		}
		if logScale {
			if start <= 0 || end <= 0 {
				return fail("a logarithmic range needs both ends > 0, got %s and %s",
					strconv.FormatFloat(start, 'g', -1, 64), strconv.FormatFloat(end, 'g', -1, 64))
			}
			return Log(start, end, n), nil
		}
		return Linear(start, end, n), nil
	}
	items := strings.Split(t, ",")
	out := make([]float64, len(items))
	for i, item := range items {
		v, err := number(item)
		if err != nil {
			if len(items) == 1 {
				return fail("%v", err)
			}
			return fail("item %d: %v", i+1, err)
		}
		out[i] = v
	}
	return out, nil
}

// ParseVector returns the three numbers of a vector written x,y,z.
func ParseVector(s string) ([3]float64, error) {
	var v [3]float64
	items := strings.Split(s, ",")
	if len(items) != 3 {
		n := len(items)
		if strings.TrimSpace(s) == "" {
			n = 0
		}
		return v, &Error{Input: s, Reason: fmt.Sprintf("a vector is 3 numbers x,y,z separated by commas, got %d", n)}
	}
	for i, item := range items {
		x, err := number(item)
		if err != nil {
			return v, &Error{Input: s, Reason: fmt.Sprintf("component %d: %v", i+1, err)}
		}
		v[i] = x
	}
	return v, nil
}

// Linear returns n >= 2 points from start to end, evenly spaced, with both
// ends exact. It panics when n < 2.
func Linear(start, end float64, n int) []float64 {
	if n < 2 {
		panic("grid: Linear needs n >= 2")
	}
	out := make([]float64, n)
	for i := range out {
		f := float64(i) / float64(n-1)
		out[i] = start + f*(end-start)
	}
	out[n-1] = end
	return out
}

// Log returns n >= 2 points from start to end, both > 0, evenly spaced in
// log, with both ends exact. It panics when n < 2 or an end is not positive.
func Log(start, end float64, n int) []float64 {
	if n < 2 || start <= 0 || end <= 0 {
		panic("grid: Log needs n >= 2 and positive ends")
	}
	out := make([]float64, n)
	a, b := math.Log(start), math.Log(end)
	for i := range out {
		f := float64(i) / float64(n-1)
		out[i] = math.Exp(a + f*(b-a))
	}
	out[0], out[n-1] = start, end
	return out
}

// number parses one finite decimal number.
func number(item string) (float64, error) {
	t := strings.TrimSpace(item)
	if t == "" {
		return 0, fmt.Errorf("missing number")
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil {
		if ne, ok := err.(*strconv.NumError); ok && ne.Err == strconv.ErrRange {
			if math.IsInf(v, 0) {
				return 0, fmt.Errorf("%q is out of range", t)
			}
			return v, nil // underflow to a tiny or zero value
		}
		return 0, fmt.Errorf("%q is not a number", t)
	}
	// strconv also reads hexadecimal floats and underscores; a physics
	// command line means neither.
	if strings.ContainsAny(t, "xX_") {
		return 0, fmt.Errorf("%q is not a decimal number", t)
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%q is not a finite number", t)
	}
	return v, nil
}

// count parses the number of points of a range.
func count(item string) (int, error) {
	t := strings.TrimSpace(item)
	if t == "" {
		return 0, fmt.Errorf("missing number of points")
	}
	n, err := strconv.Atoi(t)
	if err != nil {
		if ne, ok := err.(*strconv.NumError); ok && ne.Err == strconv.ErrRange {
			return 0, fmt.Errorf("%s points is more than the %d allowed", t, MaxPoints)
		}
		if _, ferr := strconv.ParseFloat(t, 64); ferr == nil {
			return 0, fmt.Errorf("the number of points must be a whole number, got %q", t)
		}
		return 0, fmt.Errorf("%q is not a number of points", t)
	}
	if n < 2 {
		return 0, fmt.Errorf("a range needs at least 2 points, got %d", n)
	}
	if n > MaxPoints {
		return 0, fmt.Errorf("%d points is more than the %d allowed", n, MaxPoints)
	}
	return n, nil
}
