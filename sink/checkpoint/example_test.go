package checkpoint_test

import (
	"fmt"
	"os"
	"time"

	"lariat/sink/checkpoint"
)

// A model's state is framed, saved twice, and the newest good one loaded.
func ExampleDir() {
	dir, _ := os.MkdirTemp("", "lariat-checkpoints-")
	defer os.RemoveAll(dir)
	store, err := checkpoint.NewDir(dir)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, state := range []string{"state after 1000 records", "state after 2000 records"} {
		frame := checkpoint.Encode([]byte(state), checkpoint.Meta{Arithmetic: checkpoint.Portable, Written: time.Now()})
		if err := store.Save("bearing-temp", frame); err != nil {
			fmt.Println(err)
			return
		}
	}
	payload, meta, skipped, err := store.Load("bearing-temp")
	fmt.Printf("%s (%s arithmetic, format %d, %d skipped, err %v)\n", payload, meta.Arithmetic, meta.Format, len(skipped), err)
	// Output:
	// state after 2000 records (portable arithmetic, format 1, 0 skipped, err <nil>)
}
