package main

import (
	"bytes"
	"context"
	"fmt"
	"math/rand/v2"
	"strconv"

	"frustum/cluster"
	"frustum/ed"
	frustumv1 "frustum/proto/frustum/v1"
	"frustum/tasks"
)

// demoHidden is the hidden model behind the INVENTED demo data: the demo
// heptamer with other defect parameters, and the link of the measured
// quantity to the cluster's polarization. The demo's fit is meant to find
// these numbers again; they appear nowhere but here and in the demo's
// closing lines.
var demoHidden = struct {
	params       cluster.MultimerParams
	scale, shift float64 // y = scale * M/M_sat + shift, in percent
	sigma        float64 // noise, percent
	temps        []float64
	fieldStep    float64
	fieldMax     float64
	seed         uint64
}{
	params: cluster.MultimerParams{CentreSpin: 0.5, HostSpin: 0.5, JPlanar: 180, JDefect: 8.6, GHost: 2.1, GCentre: 2.26,
		Name: "hidden model of the invented demo data"},
	scale: 31, shift: -0.4, sigma: 0.35,
	temps:     []float64{2, 4, 8},
	fieldStep: 0.5, fieldMax: 14,
	seed: 7,
}

// makeDemoData computes the demo data from the hidden model plus seeded
// Gaussian noise: a field-induced change of an invented transport quantity,
// in percent, linked to the cluster's polarization M/M_sat along z.
func makeDemoData() ([]byte, error) {
	h := demoHidden
	var fields []float64
	for B := h.fieldStep; B <= h.fieldMax+1e-9; B += h.fieldStep {
		fields = append(fields, B)
	}
	c := cluster.DefectMultimer(h.params).ToProto()
	res, err := tasks.Magnetization(context.Background(), c, &frustumv1.MagnetizationParameters{Temperatures: h.temps, Fields: fields}, ed.Options{})
	if err != nil {
		return nil, err
	}
	rng := rand.New(rand.NewPCG(h.seed, h.seed))
	var b bytes.Buffer
	fmt.Fprintf(&b, "# INVENTED demo data of the invented compound %s (not a real material):\n", demoCompound)
	fmt.Fprintf(&b, "# field-induced relative change of its thermal conductivity, percent, at three temperatures.\n")
	fmt.Fprintf(&b, "# Made by cmd/frustum/demodata_test.go from a hidden cluster model plus Gaussian noise of the sigma given.\n")
	fmt.Fprintf(&b, "T_K,B_T,y_percent,sigma_percent\n")
	for _, curve := range res.GetCurves() {
		for i, B := range fields {
			p := curve.GetMagnetization()[i] / res.GetSaturation()
			y := h.scale*p + h.shift + h.sigma*rng.NormFloat64()
			fmt.Fprintf(&b, "%s,%s,%s,%s\n", strconv.FormatFloat(curve.GetTemperature(), 'g', -1, 64), strconv.FormatFloat(B, 'g', -1, 64),
				strconv.FormatFloat(y, 'f', 3, 64), strconv.FormatFloat(h.sigma, 'g', -1, 64))
		}
	}
	return b.Bytes(), nil
}
