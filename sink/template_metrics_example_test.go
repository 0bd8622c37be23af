package sink_test

import (
	"fmt"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"

	"lariat/sink"
)

// The template metrics on a registry: instances known and loaded, and the
// state size of one instance.
func ExampleNewTemplateMetrics() {
	reg := prometheus.NewRegistry()
	m, err := sink.NewTemplateMetrics(reg)
	if err != nil {
		fmt.Println(err)
		return
	}
	m.Known.WithLabelValues("trip").Set(50)
	m.Loaded.WithLabelValues("trip").Set(12)
	m.StateBytes.WithLabelValues("trip.p07").Set(73944)
	fmt.Println(testutil.ToFloat64(m.Known.WithLabelValues("trip")), testutil.ToFloat64(m.StateBytes.WithLabelValues("trip.p07")))
	// Output: 50 73944
}
