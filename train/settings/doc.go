// Package settings is stria's typed config: the YAML schema (Config and
// its sections, with the compare and acuity sections), Defaults, the
// loader (LoadConfig, ParseConfig: unknown keys and mistakes are refused
// with the key named, relative paths resolved against the config file),
// Validate, the typed words, and the settings a result depends on
// (NumericSettings, DiffSettings, Hash). A run folder's settings.yaml is
// Config.Marshal of the resolved settings.
//
// Conventions:
//   - Words from the config (loss, output, border, encoding, optimizer,
//     solver, decoder) are parsed once into typed values (Loss, Encoding,
//     ...); code switches on them and never compares strings. An unknown
//     word is an error listing the words allowed.
//   - Validate checks every field and names the key in its error; a
//     Config that passed Validate is what train, train/compare and the
//     commands work from.
//   - Imports nn, data and eval only (Config.Shape, Config.Source,
//     Config.DataAxis); it knows nothing of fitting.
package settings
