/**
 * The statistics the detectors are built on (Mann-Kendall trend test, Sen's slope, CUSUM, the
 * bias-corrected moving average, Prechelt's stopping criteria, lag-1 autocorrelation, the
 * learning-rate range test), each checked in its tests against its published values. No
 * knowledge of guards or runs.
 */
package dev.stepwarden.stats;
