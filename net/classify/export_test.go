package classify

// PolyCoefficients returns the coefficients classify fitted for a node.
func PolyCoefficients(m *Model, node string) []float64 {
	for i, n := range m.info.Graph {
		if n.Name == node && m.layers[i].poly != nil {
			return m.layers[i].poly.C
		}
	}
	return nil
}
