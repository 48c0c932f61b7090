package dev.stepwarden.queue;

import java.time.Instant;

/**
 * One line of {@code queue list} ({@code --json} prints it with snake_case keys).
 *
 * @param status waiting, after (waits for another job), running, done, cancelled, interrupted,
 *     failed, median-stopped
 * @param next the next start time of a job that waits for its time, or null
 * @param due whether it waits only for a free slot (its turn among the due jobs is its priority)
 * @param outcome how the last run ended (finished, stopped-early, gave-up, ...) or null
 * @param cohort the cohort the median stopping rule compares it with, or null
 * @param ended when it ended (ISO instant), or null
 */
public record JobView(String id, String name, String status, int priority, String after,
    String schedule, Instant next, boolean due, String outcome, Integer exitCode, String runDir,
    String node, int attempts, String cohort, String ended) {
  /** One line of {@code queue list --json}: snake_case keys, as in every file of stepwarden. */
  public static String json(JobView v) {
    return Queue.JSON.writeValueAsString(v);
  }
}
