// Package sequential holds the statistics of an experiment watched look by
// look: group-sequential boundaries from alpha-spending functions
// ([Boundaries], [OBrienFlemingSpending], [PocockSpending], [SplitAlpha])
// and the always-valid mixture sequential probability ratio test for a
// difference of two proportions ([MixtureSPRT]). It imports only gonum.
package sequential
