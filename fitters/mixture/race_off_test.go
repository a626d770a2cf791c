//go:build !race

package mixture

const raceEnabled = false
