/**
 * Prometheus metrics of live runs: {@link dev.stepwarden.telemetry.RunMeters} observes a
 * run through its {@link dev.stepwarden.supervise.RunObserver} hooks, {@link
 * dev.stepwarden.telemetry.MetricsServer} serves them in the Prometheus text format.
 */
package dev.stepwarden.telemetry;
