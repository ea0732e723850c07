// Package figure draws Frustum's results as figures: gonum plots, stacked
// into panels where a figure has several, saved as PNG or SVG.
//
// # Overview
//
// Each function takes a result message of package frustumv1 and returns a
// *Figure, or a *DataError naming the field of the message that cannot be
// drawn (an empty array, arrays of different lengths, a number that is not
// finite). Save writes a figure to a file, choosing the format by the file
// extension:
//
//	fig, err := figure.Magnetization(res, figure.MagnetizationOptions{Groups: true})
//	...
//	err = figure.Save(fig, "m.png", 16, 11) // centimetres; 0, 0 for the figure's own size
//
// # The figures and their units
//
// Units are those of the results: energies and temperatures in K, fields
// in T, moments in mu_B per cluster, specific heat and entropy in k_B per
// cluster, susceptibility in mu_B/T per cluster.
//
//	Magnetization  M (mu_B per cluster) against B (T), one line per
//	               temperature, coloured from the lowest temperature (blue)
//	               to the highest (red), with the saturation moment dotted
//	               where the curves reach half of it; optionally each site
//	               group's moment dashed in the colour of its temperature, or
//	               the polarization M/M_sat instead of M. The title names the
//	               field direction, or the quadrature rule of a powder
//	               average, and the saturation moment.
//	Thermo         four panels sharing the temperature axis (logarithmic when
//	               the temperatures span more than a decade): the energy E
//	               (K), the specific heat C (k_B), the entropy S (k_B) with its
//	               high-temperature limit ln(dim) dotted, and the susceptibility
//	               chi = dM/dB (mu_B/T).
//	Zeeman         a level diagram: the energies E (K, absolute) of the lowest
//	               levels against B (T) along one direction, each level
//	               followed across fields by its S^z and S and coloured by S^z;
//	               the ground-state level crossings ringed on the ground level,
//	               with a dotted vertical line and the field in T at its foot.
//	Fit            the measured y (the data's unit) against B (T) with error
//	               bars sigma, one colour per temperature, and every model's
//	               curve at the data points (the best solid, the others
//	               dashed, the baselines dotted or dot-dashed), with a legend
//	               of each model's reduced chi-square; below, the residuals
//	               (y - model)/sigma, one marker shape per model.
//	Collapse       the measured y against x = g mu_B B / (2 k_B T), one colour
//	               per temperature, and the free-spin baselines dotted or
//	               dot-dashed: free spins put every temperature on one curve,
//	               and coupled spins visibly do not.
//
// GroundCrossings returns the fields of the ground-state crossings that
// Zeeman marks, for printing and testing; its documentation says how they
// are found with and without quantum numbers.
//
// # Layout
//
// A Figure is a title above one or more panels stacked top to bottom, each
// a *plot.Plot that may be changed before saving. Panels sharing the
// horizontal axis carry its tick labels on the bottom panel only, and the
// data areas of all panels are aligned left and right. Legends with more
// than an entry or two stand beside the data area (Panel.Legend), where
// they hide nothing; long legend entries and titles are broken between
// words.
//
// PNG images have 150 dots per inch, drawn in Liberation Sans, the
// sans-serif font that comes with gonum/plot and has the Greek letters used
// here (μ_B, χ, σ). SVG images are vector graphics that name that font
// without embedding it; a viewer without it substitutes its own.
//
// # Caveats
//
// The figures draw what the results hold: model curves in Fit are the
// values at the data points joined by straight lines, not a fine curve
// between them. Zeeman follows levels across fields by their quantum
// numbers; without them it joins the n-th lowest state at each field, which
// draws a crossing as two levels that touch and part. GroundCrossings sees
// an avoided crossing narrower than the grid resolves as a crossing.
package figure
