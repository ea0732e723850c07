// Package compare sets cluster models against measured field-dependent data
// y(B, T).
//
// Measured data are read from CSV (ReadCSV, LoadCSV) or built in code from
// the MeasuredData message and checked (Data.Validate); every refusal names
// the file line and column, or the message field, of each problem
// (DataError, DataErrors).
//
// The paramagnetic baselines are free spins (FreeSpin): their polarization
// is the Brillouin function B_S of g mu_B S B / k_B T, a function of B/T
// alone, so plotted against the scaling variable x = g mu_B B / (2 k_B T)
// (ScalingVariable) curves at every temperature fall onto one. A coupled
// cluster breaks that scaling, which is what tells the models apart.
//
// Units: fields in T, temperatures in K, moments in mu_B, mu_B/k_B =
// ed.MuBOverKB K/T.
package compare
