// Package fit is the batch side of lariat, the `lariat fit` command: it reads
// one CSV file, makes the whole file the window and runs the learner the
// daemon runs on streams (its per-model pipeline.Pipeline: the same split
// of held-out rows, the same ladder) until its KKT conditions hold,
// choosing λ on held-out rows unless one is given, and writes the model as a
// table or as JSON. It owns the CSV conventions of that command (header row,
// skipped text columns, missing cells) and its one-line errors (*Error).
//
// Concurrency: Run keeps all of its state in the call, so concurrent calls
// are independent and need no synchronization.
package fit
