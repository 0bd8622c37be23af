package sink_test

import (
	"fmt"
	"strings"

	"lariat/sink"
)

// An error message quotes a request value with QuoteInput: short values
// whole, long ones as their first sink.MaxEcho bytes and their length.
func ExampleQuoteInput() {
	fmt.Println("unknown model " + sink.QuoteInput("pump-7"))
	fmt.Println("unknown model " + sink.QuoteInput(strings.Repeat("a", 10_000)))
	// Output:
	// unknown model "pump-7"
	// unknown model "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa"… (10000 bytes)
}
