/**
 * The morning report: {@link dev.stepwarden.report.RunReport} reads a run directory (audit
 * log, normalized metrics) into text, JSON and HTML; {@link dev.stepwarden.report.Overview} sums
 * up a folder of runs.
 */
package dev.stepwarden.report;
