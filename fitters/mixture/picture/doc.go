// Package picture draws fitted mixture models with gonum.org/v1/plot: a
// two-feature view (rows coloured by most probable component, each
// component's 1-, 2- and 3-sigma ellipses of its marginal over the two
// features, the mixture's marginal log-density as shaded bands, and marked
// rows), the objective per iteration of a fit, and the criteria against the
// number of components of a selection fit.
//
// It lives beside the model (under fitters/mixture) because it needs only
// the model's parameters and math, and both the command-line client and the
// daemon's status page import it; the daemon must not import cmd/.
//
// The colours follow the Okabe–Ito palette, chosen to stay distinguishable
// for readers with the common forms of colour-vision deficiency.
//
// A marked row is a statement about statistical rarity under the fitted
// model, not a diagnosis of equipment: decisions about equipment or safety
// remain with the operator's own procedures.
package picture
