package unfold

import (
	"fmt"
	"strings"
)

// InputError reports a problem whose inputs are inconsistent or invalid:
// a size mismatch, a negative or non-finite count, a truth bin with
// migrations but no generated count, data in a reco bin that no truth
// bin and no background can explain. Field names the Problem field
// ("Migrations", "Generated", "Data", "DataVariance", "Background",
// "BackgroundVariance", "Prior"); Reco and Truth are the bins concerned,
// -1 when not applicable. Callers that read the inputs from files can
// map Field and the bins back to a file and line.
type InputError struct {
	Field  string
	Reco   int
	Truth  int
	Reason string
}

func (e *InputError) Error() string {
	var b strings.Builder
	b.WriteString("unfold: ")
	b.WriteString(e.Field)
	switch {
	case e.Reco >= 0 && e.Truth >= 0:
		fmt.Fprintf(&b, " (reco bin %d, truth bin %d)", e.Reco, e.Truth)
	case e.Reco >= 0:
		fmt.Fprintf(&b, " (reco bin %d)", e.Reco)
	case e.Truth >= 0:
		fmt.Fprintf(&b, " (truth bin %d)", e.Truth)
	}
	b.WriteString(": ")
	b.WriteString(e.Reason)
	return b.String()
}

func inputErr(field string, reco, truth int, format string, a ...any) *InputError {
	return &InputError{Field: field, Reco: reco, Truth: truth, Reason: fmt.Sprintf(format, a...)}
}

// SettingsError reports an invalid or contradictory Settings value, for
// example a negative iteration count or both a fixed number of
// iterations and a stopping threshold.
type SettingsError struct {
	Field  string
	Reason string
}

func (e *SettingsError) Error() string {
	return "unfold: setting " + e.Field + ": " + e.Reason
}

// TooLargeError reports that an uncertainty computation was refused
// because its memory estimate exceeds Settings.MemoryLimit. Bytes is the
// estimate, Limit the limit in force; Columns is the number of Jacobian
// columns (the reco bins, twice when a background variance is
// propagated); Alternative says what to ask for instead.
type TooLargeError struct {
	What        string
	TruthBins   int
	RecoBins    int
	Columns     int
	Bytes       int64
	Limit       int64
	Alternative string
}

func (e *TooLargeError) Error() string {
	size := fmt.Sprintf("%d truth × %d reco bins", e.TruthBins, e.RecoBins)
	if e.Columns != e.RecoBins {
		size += fmt.Sprintf(" (data and background: %d Jacobian columns)", e.Columns)
	}
	return fmt.Sprintf("unfold: %s for %s needs about %s, above the memory limit of %s; %s",
		e.What, size, byteSize(e.Bytes), byteSize(e.Limit), e.Alternative)
}

// NumericalError reports a numerical failure of a method: a non-finite
// value during the iteration (with valid inputs, overflow), a singular
// system, a solve that did not converge, or a non-finite number in the
// result. Iteration is the iteration concerned, 0 (or −1, for the result)
// when the failure is not in an iteration.
type NumericalError struct {
	Iteration int
	Reason    string
}

func (e *NumericalError) Error() string {
	if e.Iteration < 0 {
		return "unfold: numerical failure: " + e.Reason
	}
	if e.Iteration == 0 {
		return "unfold: " + e.Reason
	}
	return fmt.Sprintf("unfold: iteration %d: %s", e.Iteration, e.Reason)
}

func byteSize(n int64) string {
	const (
		kib = 1 << 10
		mib = 1 << 20
		gib = 1 << 30
	)
	switch {
	case n >= gib:
		return fmt.Sprintf("%.1f GiB", float64(n)/gib)
	case n >= mib:
		return fmt.Sprintf("%.1f MiB", float64(n)/mib)
	case n >= kib:
		return fmt.Sprintf("%.1f KiB", float64(n)/kib)
	}
	return fmt.Sprintf("%d B", n)
}
