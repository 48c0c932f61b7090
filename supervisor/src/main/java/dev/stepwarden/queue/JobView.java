package dev.stepwarden.queue;

import java.time.Instant;

/**
 * One line of {@code queue list}.
 *
 * @param status waiting, after (waits for another job), running, done, cancelled, interrupted,
 *     failed, median-stopped
 * @param outcome how the last run ended (finished, stopped-early, gave-up, ...) or null
 * @param next the next start time, or null
 */
public record JobView(String id, String name, String status, int priority, String after,
    String schedule, Instant next, String outcome, Integer exitCode, String runDir, String node,
    int attempts, String study) {}
