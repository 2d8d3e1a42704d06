//go:build race

package dedup

// raceEnabled is true under the race detector, which makes sync.Pool drop
// items at random (so pooled scratch allocates).
const raceEnabled = true
