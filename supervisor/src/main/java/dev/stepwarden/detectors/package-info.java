/**
 * The detectors: each watches one series and says, point by point, whether its condition holds,
 * with the numbers that show it ({@link dev.stepwarden.detectors.Evidence}). Deterministic and
 * of bounded memory, so that a replay gives the live run's answers.
 */
package dev.stepwarden.detectors;
