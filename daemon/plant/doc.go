// Package plant simulates the invented pumping station of `lariat demo`:
// several pumps with about 40 channels each, a logistic target (will the
// pump trip?) and a linear one (bearing temperature), and a bearing fault
// that begins at a chosen time. It owns the simulation and its subjects;
// records are written with record.AppendJSON, the one encoder of the wire
// format. The machines, channel names, coefficients and the fault are made
// up and describe no real equipment or data set.
//
// Concurrency: a Plant is owned by one goroutine (Next and Run are not safe
// for concurrent use).
package plant
