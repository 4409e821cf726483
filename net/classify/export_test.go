package classify

// SetPolyCoefficients replaces the Chebyshev coefficients of the named
// poly-relu node, so that a test can run classify's evaluation on the
// training library's own coefficients.
func SetPolyCoefficients(m *Model, node string, c []float64) bool {
	for i, n := range m.info.Graph {
		if n.Name == node && m.layers[i].poly != nil {
			m.layers[i].poly.c = append([]float64(nil), c...)
			return true
		}
	}
	return false
}

// PolyCoefficients returns the coefficients classify fitted for a node.
func PolyCoefficients(m *Model, node string) []float64 {
	for i, n := range m.info.Graph {
		if n.Name == node && m.layers[i].poly != nil {
			return m.layers[i].poly.c
		}
	}
	return nil
}
