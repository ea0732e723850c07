package client_test

import (
	"context"
	"errors"
	"fmt"
	"log"
	"os"
	"os/signal"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"frustum/client"
	"frustum/cluster"
	frustumv1 "frustum/proto/frustum/v1"
)

// Run a magnetization task on a frustumd and print the curve at the lowest
// temperature. Interrupting the program cancels the job on the server.
func Example() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()

	c, err := client.Dial(ctx, "127.0.0.1:7447", client.WithTokenFile(os.ExpandEnv("$HOME/.config/frustum/token")))
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()

	m, err := cluster.LoadFile("testdata/demo-multimer.json")
	if err != nil {
		log.Fatal(err)
	}
	spec := &frustumv1.JobSpec{
		Cluster: m.ToProto(),
		Task: &frustumv1.JobSpec_Magnetization{Magnetization: &frustumv1.MagnetizationParameters{
			Temperatures: []float64{2, 5, 10},
			Fields:       []float64{0, 5, 10, 15},
			Direction:    []float64{0, 0, 1},
		}},
	}
	res, err := c.Run(ctx, spec, "", func(j *frustumv1.Job) {
		fmt.Fprintf(os.Stderr, "%s %s %.0f%%\n", j.GetState(), j.GetProgress().GetStage(), 100*j.GetProgress().GetFraction())
	})
	var failed *client.JobError
	switch {
	case errors.As(err, &failed):
		log.Fatalf("the job failed: %v (fields %v)", failed.Message, failed.Fields)
	case status.Code(err) == codes.InvalidArgument:
		log.Fatalf("refused: %v (fields %v)", err, client.FieldViolations(err))
	case err != nil:
		log.Fatal(err)
	}
	curve := res.(*frustumv1.MagnetizationResult).GetCurves()[0]
	fmt.Println(curve.GetTemperature(), curve.GetMagnetization())
}

// Follow a job that was submitted earlier, by its id.
func ExampleClient_Watch() {
	ctx := context.Background()
	c, err := client.Dial(ctx, "127.0.0.1:7447")
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	job, err := c.Watch(ctx, "jobs/0123abcd", func(j *frustumv1.Job) {
		p := j.GetProgress()
		fmt.Printf("%s %s %d/%d\n", j.GetState(), p.GetStage(), p.GetDone(), p.GetTotal())
	})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(job.GetName(), "ended", job.GetState())
}
