package train

import (
	"context"
	"errors"
)

// fitProjected trains with the closed-form readout (METHODS.md §8,
// variable projection).
func fitProjected(ctx context.Context, p *Prepared, hooks Hooks, resume *Checkpoint) (*Fitted, error) {
	return nil, errors.New("train.solver projected: not implemented yet")
}
