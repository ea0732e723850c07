package ed

import "fmt"

// LimitError refuses a task whose Hilbert space or memory exceeds the limits.
// It is returned before anything large is allocated.
type LimitError struct {
	// Dimension of the whole Hilbert space and of the largest block that
	// would be diagonalized densely.
	Dimension, LargestSector int64
	// Need is the estimated peak memory of the task and Limit the allowed
	// memory, in bytes.
	Need, Limit int64
}

func (e *LimitError) Error() string {
	return fmt.Sprintf("task too large: Hilbert space of %d states (largest block %d) needs about %s, over the memory limit of %s",
		e.Dimension, e.LargestSector, FormatBytes(e.Need), FormatBytes(e.Limit))
}

// RequestError names the request field that is wrong and why.
type RequestError struct {
	Field, Reason string
}

func (e *RequestError) Error() string { return e.Field + ": " + e.Reason }

// NumericalError reports a dense eigensolver that did not converge.
type NumericalError struct {
	Sector string
	Detail string
}

func (e *NumericalError) Error() string {
	return "eigensolver did not converge in sector " + e.Sector + ": " + e.Detail
}

// FormatBytes prints a byte count with a binary unit (KiB, MiB, GiB).
func FormatBytes(b int64) string {
	const k = 1024
	switch {
	case b >= k*k*k:
		return fmt.Sprintf("%.2f GiB", float64(b)/(k*k*k))
	case b >= k*k:
		return fmt.Sprintf("%.1f MiB", float64(b)/(k*k))
	case b >= k:
		return fmt.Sprintf("%.1f KiB", float64(b)/k)
	}
	return fmt.Sprintf("%d B", b)
}
