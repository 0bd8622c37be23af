//go:build soak

package pipeline

// Under -tags soak TestGuardNeverTrips runs 200,000 records per stream
// (go test -tags soak -run TestGuardNeverTrips -v ./daemon/pipeline/, a few
// minutes on 2 cores); these are the figures in the README.
func init() { guardRunRecords = 200_000 }
