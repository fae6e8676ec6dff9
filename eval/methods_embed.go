package eval

import _ "embed"

// Methods is the text of eval/methods.md, the project's methods reference:
// formulas, conventions, sources and worked check values, by section
// (§0-§15). The command prints it as the help topic "methods".
//
//go:embed methods.md
var Methods string
