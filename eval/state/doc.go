// Package state models trial-to-trial variability that follows the animal's
// state (running, arousal) as a gain and an offset on the stimulus tuning.
package state
