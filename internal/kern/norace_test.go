//go:build !race

package kern

const raceOn = false
