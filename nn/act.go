package nn

import (
	"fmt"
	"math"
)

// ReLU computes dst[i] = max(x[i], 0) for i < len(x). dst may be x.
// It panics if dst is shorter than x.
func ReLU(dst, x []float64) {
	if len(dst) < len(x) {
		panic(fmt.Sprintf("nn: ReLU dst has %d values, want %d", len(dst), len(x)))
	}
	dst = dst[:len(x)]
	for i, v := range x {
		if v > 0 {
			dst[i] = v
		} else {
			dst[i] = 0
		}
	}
}

// ReLUBackward computes dx[i] = dy[i] if y[i] > 0, else 0, where y is the
// ReLU output of the forward pass (y > 0 exactly when the input was > 0; the
// derivative at 0 is taken as 0, as torch does). It OVERWRITES
// dx[:len(dy)]; dx may be dy. It panics if y or dx is shorter than dy.
func ReLUBackward(dx, dy, y []float64) {
	if len(y) < len(dy) || len(dx) < len(dy) {
		panic(fmt.Sprintf("nn: ReLUBackward lengths dx %d, dy %d, y %d", len(dx), len(dy), len(y)))
	}
	dx = dx[:len(dy)]
	y = y[:len(dy)]
	for i, g := range dy {
		if y[i] > 0 {
			dx[i] = g
		} else {
			dx[i] = 0
		}
	}
}

// Activation is the output nonlinearity applied after the readout.
type Activation int

const (
	// Identity is f(z) = z.
	Identity Activation = iota
	// Softplus is f(z) = log(1+exp(z)), computed stably as
	// max(z, 0) + log1p(exp(-|z|)); f'(z) = 1/(1+exp(-z)). torch's
	// F.softplus returns z itself above z = 20 (beta 1, threshold 20), which
	// differs from the exact value by less than 2.1e-9 absolute.
	Softplus
	// Exp is f(z) = exp(z); f'(z) = exp(z).
	Exp
)

// String returns "identity", "softplus" or "exp".
func (a Activation) String() string {
	switch a {
	case Identity:
		return "identity"
	case Softplus:
		return "softplus"
	case Exp:
		return "exp"
	}
	return fmt.Sprintf("Activation(%d)", int(a))
}

func (a Activation) check() {
	if a != Identity && a != Softplus && a != Exp {
		panic(fmt.Sprintf("nn: unknown output activation %d", int(a)))
	}
}

// softplus returns log(1+exp(z)) without overflow or cancellation.
func softplus(z float64) float64 {
	if z > 0 {
		return z + math.Log1p(math.Exp(-z))
	}
	return math.Log1p(math.Exp(z))
}

// sigmoid returns 1/(1+exp(-z)) without overflow.
func sigmoid(z float64) float64 {
	if z >= 0 {
		return 1 / (1 + math.Exp(-z))
	}
	e := math.Exp(z)
	return e / (1 + e)
}

// Forward computes dst[i] = f(z[i]) for i < len(z). dst may be z.
// It panics if dst is shorter than z or a is unknown.
func (a Activation) Forward(dst, z []float64) {
	a.check()
	if len(dst) < len(z) {
		panic(fmt.Sprintf("nn: activation dst has %d values, want %d", len(dst), len(z)))
	}
	dst = dst[:len(z)]
	switch a {
	case Identity:
		copy(dst, z)
	case Softplus:
		for i, v := range z {
			dst[i] = softplus(v)
		}
	case Exp:
		for i, v := range z {
			dst[i] = math.Exp(v)
		}
	}
}

// Backward computes dz[i] = dy[i] * f'(z[i]) for i < len(dy), where z is the
// input and y = f(z) the output of the forward pass (Exp uses y, Softplus
// uses z). It OVERWRITES dz; dz may be dy. It panics on short slices.
func (a Activation) Backward(dz, dy, z, y []float64) {
	a.check()
	n := len(dy)
	if len(dz) < n || len(z) < n || len(y) < n {
		panic(fmt.Sprintf("nn: activation backward lengths dz %d, dy %d, z %d, y %d", len(dz), n, len(z), len(y)))
	}
	dz, z, y = dz[:n], z[:n], y[:n]
	switch a {
	case Identity:
		copy(dz, dy)
	case Softplus:
		for i, g := range dy {
			dz[i] = g * sigmoid(z[i])
		}
	case Exp:
		for i, g := range dy {
			dz[i] = g * y[i]
		}
	}
}

// MarshalText implements encoding.TextMarshaler: the String form.
func (a Activation) MarshalText() ([]byte, error) {
	if a != Identity && a != Softplus && a != Exp {
		return nil, fmt.Errorf("nn: unknown output activation %d", int(a))
	}
	return []byte(a.String()), nil
}

// UnmarshalText implements encoding.TextUnmarshaler: "identity",
// "softplus" or "exp".
func (a *Activation) UnmarshalText(b []byte) error {
	switch string(b) {
	case "identity":
		*a = Identity
	case "softplus":
		*a = Softplus
	case "exp":
		*a = Exp
	default:
		return fmt.Errorf("%q: want identity, softplus or exp", b)
	}
	return nil
}
