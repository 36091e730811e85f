package status

// The palette of the page, the HTML report and the dashboard in deploy/:
// colours from Okabe & Ito's colour-blind-safe set (Color Universal
// Design, 2008), chosen so that neither model reads as the bad one: no
// red/green pair, the incumbent blue, the challenger orange. style.css
// defines the same colours; a test keeps them equal.
const (
	ColorIncumbent  = "#0072B2" // blue
	ColorChallenger = "#E69F00" // orange
	ColorTie        = "#CC79A7" // reddish purple
	ColorBand       = "#56B4E9" // sky blue: the always-valid interval
	ColorDelta      = "#000000" // black: Delta itself
	ColorAlarm      = "#D55E00" // vermillion: a tripped guardrail, an error
	ColorNeutral    = "#999999" // grey: no feedback, still open, secondary marks
)
