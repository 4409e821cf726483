package optim

import "github.com/rhomb/rhomb/net"

// TrainingModer is implemented by models whose forward pass differs
// between training and inference: a network with batch normalization
// normalizes by the batch's statistics in training mode and by its
// running statistics in inference mode. *net.Network implements it.
type TrainingModer interface{ SetTraining(on bool) }

// SetTraining puts m into training mode (on) or inference mode. A model
// that does not implement TrainingModer itself (normalize.Net) is
// switched through its base network.
//
// The trainer calls it around the forward pass of each of its steps
// only: training mode for that pass (whose Backward follows it), then
// inference mode again, so that every other Forward — validation scores,
// the hooks' whole-set margins, the curvature measurement, a saved
// model's predictions — uses the running statistics.
func SetTraining[T net.Float](m Model[T], on bool) {
	if tm, ok := m.(TrainingModer); ok {
		tm.SetTraining(on)
		return
	}
	m.Base().SetTraining(on)
}
