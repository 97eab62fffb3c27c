package dw

// Rebuilds returns the number of times m's master was built.
func Rebuilds(m *Model) int { return m.rebuilds }
