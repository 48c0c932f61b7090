/**
 * Reading what a trainer prints or writes: {@link dev.stepwarden.metrics.ReadPlan} says where
 * and how, {@link dev.stepwarden.metrics.MetricsSources} and {@link
 * dev.stepwarden.metrics.MetricsIntake} turn lines into {@link dev.stepwarden.metrics.Sample}s on
 * one step axis, {@link dev.stepwarden.metrics.FileFollower} follows a metrics file.
 */
package dev.stepwarden.metrics;
