package sink

import (
	"fmt"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"

	"lariat/online"
	"lariat/sink/natstest"
)

// runServerJS starts an embedded NATS server with JetStream on or off,
// shut down at the end of the test.
func runServerJS(t *testing.T, jetStream bool) *server.Server {
	t.Helper()
	o := natstest.Options(t)
	o.JetStream = jetStream
	return natstest.RunServer(t, o)
}

// connect opens a client connection to s, closed at the end of the test.
func connect(t *testing.T, s *server.Server) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect(s.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	return nc
}

// testModel builds a consistent online.Model snapshot from standardized
// coefficients theta, scale mean/std and standardized intercept b, with the
// raw-unit mapping of README.md, "The objective": coef = θ/s (0 where
// s == 0) and intercept = b − Σ θ μ/s.
func testModel(loss string, theta, mean, std []float64, b float64) *online.Model {
	coef := make([]float64, len(theta))
	intercept := b
	for j, t := range theta {
		if std[j] != 0 {
			coef[j] = t / std[j]
			intercept -= t * mean[j] / std[j]
		}
	}
	return &online.Model{
		Loss: loss, Penalty: online.Lasso(), Lambda: 0.05, Index: 3,
		Intercept: intercept, Coef: coef, Standardized: append([]float64(nil), theta...),
		StdIntercept: b, Mean: append([]float64(nil), mean...), Std: append([]float64(nil), std...),
		Records: 1000, Weight: 1000, Seen: 5000,
	}
}

// testScores returns a 5-member ladder's scores for loss.
func testScores(loss string) []online.Score {
	var s []online.Score
	for i := range 5 {
		sc := online.Score{Index: i, Lambda: 0.4 / float64(int(1)<<i), Nonzero: i, Loss: 1 - 0.1*float64(i), SE: 0.01}
		if loss == "logistic" {
			sc.AUC, sc.Brier, sc.LogLoss = 0.6+0.05*float64(i), 0.2, sc.Loss
		} else {
			sc.RMSE, sc.MAE, sc.R2 = 1.2, 0.9, 0.1*float64(i)
		}
		s = append(s, sc)
	}
	return s
}

// testDoc builds a document for a 3-feature model ("a", "b", "c"; "b" has a
// zero coefficient).
func testDoc(t testing.TB, name, loss string, version uint64) *ModelDoc {
	t.Helper()
	m := testModel(loss, []float64{0.5, 0, -1.25}, []float64{10, 2, -3}, []float64{2, 1, 0.5}, 0.75)
	in := &DocInput{
		Name: name, Version: version, Features: []string{"a", "b", "c"}, Model: m,
		Scores: testScores(loss), Holdout: 250, Applied: 6250, Rejected: 7,
		Updated: time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC),
	}
	in.Grid = &online.Grid{Anchor: online.AnchorDF, Top: 12, Bottom: 0.01, DF: [2]float64{0.5, 2.5}, Rank: 3, Extended: 3, MaxExtended: 18}
	if loss == "logistic" {
		in.Threshold = &Threshold{Value: 0.8, Mode: "fpr", Target: 0.02}
		in.Grid = &online.Grid{Anchor: online.AnchorLambdaMax, Top: 0.4, Bottom: 0.0004, MaxExtended: 22}
	}
	doc, err := NewModelDoc(in)
	if err != nil {
		t.Fatal(err)
	}
	return doc
}

// wideDoc builds a document for a d-feature model with every coefficient
// nonzero.
func wideDoc(tb testing.TB, d int) *ModelDoc {
	tb.Helper()
	theta, mean, std := make([]float64, d), make([]float64, d), make([]float64, d)
	names := make([]string, d)
	for j := range d {
		theta[j] = 0.1 * float64(j+1) * float64(1-2*(j%2))
		mean[j], std[j] = float64(j)*1.5, 1+float64(j)/10
		names[j] = fmt.Sprintf("sensor_%02d", j)
	}
	doc, err := NewModelDoc(&DocInput{
		Name: "wide", Version: 9, Features: names, Model: testModel("squared", theta, mean, std, 3),
		Scores: testScores("squared"), Holdout: 2000, Updated: time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC),
	})
	if err != nil {
		tb.Fatal(err)
	}
	return doc
}
