// Package sample holds the summaries of a sample of numbers that ferry
// reports and decides on, in one place so that every table, figure and
// rule means the same by them.
//
// gonum's stat.Quantile is not used for the median: neither of its
// cumulant kinds gives the mean of the two middle values of an even count
// (Empirical gives the lower one, LinInterp interpolates the empirical
// distribution function, which for an odd count averages the middle value
// with the one below it).
package sample
