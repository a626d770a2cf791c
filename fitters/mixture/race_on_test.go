//go:build race

package mixture

const raceEnabled = true
