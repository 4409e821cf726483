//go:build race

package kern

// raceOn: the race detector slows arithmetic tenfold or more; under it the
// tests that check arithmetic (not synchronization) run on fewer shapes.
const raceOn = true
