/**
 * The overnight queue: jobs (a guard file plus overrides) in Quartz's JDBC job store, run by
 * {@code serve} on its slots, one supervisor per job at a time. Public face: {@link
 * dev.stepwarden.queue.Queue} (add, list, cancel, purge, serve), {@link
 * dev.stepwarden.queue.Night} (a serving queue), {@link dev.stepwarden.queue.JobRequest}, {@link
 * dev.stepwarden.queue.JobView}, {@link dev.stepwarden.queue.QueueSettings}.
 */
package dev.stepwarden.queue;
