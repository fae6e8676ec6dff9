package settings

import (
	"fmt"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"

	"github.com/strialab/stria/nn"
)

// The config's word-valued settings are parsed once, when the YAML is
// read, into the typed values below; fitting code switches on them and
// never compares strings. Each type reads and writes its config word
// through encoding.TextUnmarshaler and TextMarshaler, which yaml.v3 and
// encoding/json both honour, so the resolved settings and the manifest
// carry the same words the user wrote.

// Loss is model.loss.
type Loss int

const (
	// MSE is the mean squared error, for any response.
	MSE Loss = iota
	// Poisson is the Poisson negative log-likelihood, for counts.
	Poisson
)

// Encoding is axis.encoding: how a stimulus value becomes model input.
type Encoding int

const (
	// OneHot puts a 1 in the trial's bin.
	OneHot Encoding = iota
	// Soft interpolates linearly between the two nearest bin centres.
	Soft
)

// Optimizer is train.optimizer.
type Optimizer int

const (
	// OptimizerAdam adds the weight decay to the gradient (L2 in Adam).
	OptimizerAdam Optimizer = iota
	// OptimizerAdamW decays the weights apart from the gradient step.
	OptimizerAdamW
)

// Solver is train.solver.
type Solver int

const (
	// SolverAuto is the default: the fastest exact solver the model
	// allows (SolverProjected where it applies, SolverAdam otherwise).
	SolverAuto Solver = iota
	// SolverAdam trains every weight by gradient steps: the reference, and
	// what every model can use.
	SolverAdam
	// SolverProjected computes the readout in closed form and trains the
	// filters on the projected loss (MSE, identity output, one-hot input,
	// full batch).
	SolverProjected
)

// Penalty is model.readout_l2: the ridge penalty on the readout weights,
// a number, or the word auto (the default): the filters train at Value
// (1) and the penalty is then chosen from the data at the final filters
// (eval/methods.md §12).
type Penalty struct {
	// Auto chooses the penalty from the data (projected MSE solver; the
	// other solvers train and stay at Value).
	Auto bool
	// Value is the penalty when it is fixed, and the one the filters
	// train with when it is chosen.
	Value float64
}

// AutoPenalty is the default readout penalty: chosen from the data, with
// the filters trained at 1 (on z-scored responses, lambda/(2N)
// sum ||w_n||^2 with lambda = 1).
var AutoPenalty = Penalty{Auto: true, Value: 1}

// UnmarshalYAML reads auto or a number.
func (v *Penalty) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind == yaml.ScalarNode && n.Value == "auto" {
		*v = AutoPenalty
		return nil
	}
	var f float64
	if err := n.Decode(&f); err != nil {
		return fmt.Errorf("line %d: %q: want auto or a number", n.Line, n.Value)
	}
	*v = Penalty{Value: f}
	return nil
}

// MarshalYAML writes auto or the number.
func (v Penalty) MarshalYAML() (any, error) {
	if v.Auto {
		return "auto", nil
	}
	return v.Value, nil
}

// String returns "auto" or the number.
func (v Penalty) String() string {
	if v.Auto {
		return "auto"
	}
	return strconv.FormatFloat(v.Value, 'g', -1, 64)
}

// LayerBorder is model.layers[].border: one of nn's border modes, or
// BorderAuto (the config word "auto", or leaving it out): circular on a
// periodic axis, zero padding otherwise (eval/methods.md §0 [practice]).
type LayerBorder int

const (
	BorderAuto LayerBorder = iota
	BorderZero
	BorderCircular
	BorderValid
)

var (
	lossWords      = []string{"mse", "poisson"}
	encodingWords  = []string{"onehot", "soft"}
	optimizerWords = []string{"adam", "adamw"}
	solverWords    = []string{"auto", "adam", "projected"}
	borderWords    = []string{"auto", "zero", "circular", "valid"}
)

func word(words []string, v int) string {
	if v < 0 || v >= len(words) {
		return fmt.Sprintf("invalid(%d)", v)
	}
	return words[v]
}

func marshalWord(words []string, v int) ([]byte, error) {
	if v < 0 || v >= len(words) {
		return nil, fmt.Errorf("invalid setting %d", v)
	}
	return []byte(words[v]), nil
}

// unmarshalWord sets *v to the index of b in words; the error lists the
// words the setting takes.
func unmarshalWord(words []string, b []byte, v *int) error {
	for i, w := range words {
		if string(b) == w {
			*v = i
			return nil
		}
	}
	return fmt.Errorf("%q: want %s", b, orList(words))
}

// orList writes "a, b or c".
func orList(w []string) string {
	if len(w) == 1 {
		return w[0]
	}
	return strings.Join(w[:len(w)-1], ", ") + " or " + w[len(w)-1]
}

func (v Loss) String() string                   { return word(lossWords, int(v)) }
func (v Loss) MarshalText() ([]byte, error)     { return marshalWord(lossWords, int(v)) }
func (v *Loss) UnmarshalText(b []byte) error    { return unmarshalWord(lossWords, b, (*int)(v)) }
func (v Encoding) String() string               { return word(encodingWords, int(v)) }
func (v Encoding) MarshalText() ([]byte, error) { return marshalWord(encodingWords, int(v)) }
func (v *Encoding) UnmarshalText(b []byte) error {
	return unmarshalWord(encodingWords, b, (*int)(v))
}
func (v Optimizer) String() string               { return word(optimizerWords, int(v)) }
func (v Optimizer) MarshalText() ([]byte, error) { return marshalWord(optimizerWords, int(v)) }
func (v *Optimizer) UnmarshalText(b []byte) error {
	return unmarshalWord(optimizerWords, b, (*int)(v))
}
func (v Solver) String() string                { return word(solverWords, int(v)) }
func (v Solver) MarshalText() ([]byte, error)  { return marshalWord(solverWords, int(v)) }
func (v *Solver) UnmarshalText(b []byte) error { return unmarshalWord(solverWords, b, (*int)(v)) }
func (v LayerBorder) String() string           { return word(borderWords, int(v)) }
func (v LayerBorder) MarshalText() ([]byte, error) {
	return marshalWord(borderWords, int(v))
}

// UnmarshalText reads a border word; the empty word is "auto".
func (v *LayerBorder) UnmarshalText(b []byte) error {
	if len(b) == 0 {
		*v = BorderAuto
		return nil
	}
	return unmarshalWord(borderWords, b, (*int)(v))
}

// resolve returns the nn border of a layer on an axis that is periodic
// or not.
func (v LayerBorder) resolve(periodic bool) nn.Border {
	switch v {
	case BorderZero:
		return nn.Zero
	case BorderCircular:
		return nn.Circular
	case BorderValid:
		return nn.Valid
	}
	if periodic {
		return nn.Circular
	}
	return nn.Zero
}
