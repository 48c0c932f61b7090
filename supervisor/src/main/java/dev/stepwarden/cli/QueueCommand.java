package dev.stepwarden.cli;

import dev.stepwarden.queue.JobRequest;
import dev.stepwarden.queue.JobView;
import dev.stepwarden.queue.Queue;
import dev.stepwarden.queue.QueueException;
import dev.stepwarden.queue.QueueSettings;
import java.io.PrintWriter;
import java.nio.file.Path;
import java.time.Duration;
import java.time.Instant;
import java.time.LocalDate;
import java.time.LocalDateTime;
import java.time.LocalTime;
import java.time.ZoneId;
import java.time.format.DateTimeParseException;
import java.util.List;
import java.util.Map;
import java.util.concurrent.Callable;
import picocli.CommandLine.ArgGroup;
import picocli.CommandLine.Command;
import picocli.CommandLine.Mixin;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Parameters;
import picocli.CommandLine.Spec;

@Command(name = "queue", mixinStandardHelpOptions = true, description = "The overnight queue: add, list, cancel and purge"
    + " jobs that `stepwarden serve` runs.",
    subcommands = {QueueCommand.Add.class, QueueCommand.ListJobs.class,
        QueueCommand.Cancel.class, QueueCommand.Purge.class})
final class QueueCommand implements Runnable {
  /** Options of the queue and of serve that have new names, old spelling to new. */
  static final Map<String, String> RENAMED = Map.of("--study", "--cohort", "--median-min-runs",
      "--median-quorum", "--median-min-step", "--median-from-step");

  /** The hint for an old spelling among {@code args}, or null. */
  static String renameHint(List<String> args) {
    for (String a : args) {
      String name = a.contains("=") ? a.substring(0, a.indexOf('=')) : a;
      if (RENAMED.containsKey(name)) {
        return name + " is now " + RENAMED.get(name) + " (same meaning; the old name is no"
            + " longer read)";
      }
    }
    return null;
  }

  @Spec
  CommandSpec spec;

  @Override
  public void run() {
    throw new picocli.CommandLine.ParameterException(spec.commandLine(),
        "name a queue subcommand: add, list, cancel or purge");
  }

  /** Where the queue lives; shared by queue and serve. */
  static final class Where {
    @Option(names = "--home", paramLabel = "DIR", description = "The queue's folder (default:"
        + " $STEPWARDEN_HOME or ~/.stepwarden): the embedded database and runs/.")
    Path home;

    @Option(names = "--db", paramLabel = "JDBC_URL", description = "A shared PostgreSQL queue"
        + " instead of the embedded file, e.g. jdbc:postgresql://db:5432/stepwarden.")
    String db;

    @Option(names = "--db-user", paramLabel = "USER", description = "Database user (default"
        + " postgres).")
    String dbUser;

    @Option(names = "--db-password-env", paramLabel = "VAR", description = "Read the database"
        + " password from this environment variable (default STEPWARDEN_DB_PASSWORD).")
    String dbPasswordEnv = "STEPWARDEN_DB_PASSWORD";

    @Option(names = "--table-prefix", paramLabel = "PREFIX", description = "Prefix of the"
        + " queue's tables (default SW_QRTZ_).")
    String prefix;

    @Option(names = "--runs", paramLabel = "DIR", description = "Where run directories go"
        + " (default HOME/runs; shared storage in a cluster).")
    Path runs;

    QueueSettings settings(boolean clustered, Duration checkin) {
      Path h = home;
      if (h == null) {
        String env = System.getenv("STEPWARDEN_HOME");
        h = env == null || env.isBlank() ? QueueSettings.defaultHome() : Path.of(env);
      }
      return new QueueSettings(h, db, dbUser, db == null ? null : System.getenv(dbPasswordEnv),
          prefix, clustered, checkin, runs);
    }
  }

  @Command(name = "add", mixinStandardHelpOptions = true, description = "Queue a run: a guard file plus overrides.",
      footer = {"", "Examples:",
          "  stepwarden queue add --rules night.yaml --set run.learning_rate=0.05",
          "  stepwarden queue add --rules night.yaml --at 22:30 --priority 8",
          "  stepwarden queue add --rules night.yaml --cron '0 0 22 * * ?'",
          "  stepwarden queue add --rules eval.yaml --after sensor-net-3f9a1c",
          "",
          "If the machine was off at the start time: a one-shot job starts as soon as serve"
              + " is up; a cron job runs once for the missed firings, then keeps its schedule."})
  static final class Add implements Callable<Integer> {
    @Spec
    CommandSpec spec;

    @Mixin
    Where where = new Where();

    @Option(names = "--rules", paramLabel = "FILE", required = true, description = "The guard"
        + " file; it must name run.command.")
    Path rules;

    static final class When {
      @Option(names = "--at", paramLabel = "TIME", description = "Start time: HH:MM (the next"
          + " one), YYYY-MM-DDTHH:MM (local) or an ISO instant.")
      String at;

      @Option(names = "--cron", paramLabel = "EXPR", description = "A Quartz cron expression,"
          + " seconds first, e.g. '0 0 22 * * ?'.")
      String cron;
    }

    @ArgGroup(exclusive = true)
    When when;

    @Option(names = "--priority", paramLabel = "N", description = "0 to 99 (default 5): when"
        + " a slot frees, the waiting job of the highest priority starts (of one priority, the"
        + " one added first).")
    int priority = 5;

    @Option(names = "--after", paramLabel = "JOB", description = "Start once this job ended.")
    String after;

    @Option(names = "--set", paramLabel = "KEY=VALUE", description = "Change the guard file,"
        + " e.g. --set run.learning_rate=0.05 (the value is read as YAML).")
    Map<String, String> sets;

    @Option(names = "--cohort", paramLabel = "NAME", description = "Runs of one cohort are"
        + " compared by serve's median stopping rule (Golovin et al. 2017): a run whose best so"
        + " far is worse than the median of the completed runs' averages is stopped.")
    String cohort;

    @Override
    public Integer call() {
      PrintWriter err = spec.commandLine().getErr();
      Instant at;
      try {
        at = when == null || when.at == null ? null : parseTime(when.at, Instant.now(),
            ZoneId.systemDefault());
      } catch (IllegalArgumentException e) {
        err.println("stepwarden: " + e.getMessage());
        return ExitCodes.USAGE;
      }
      try (Queue q = Queue.open(where.settings(false, null))) {
        String id = q.add(new JobRequest(rules, at, when == null ? null : when.cron, priority,
            after, sets, cohort, null));
        spec.commandLine().getOut().println(id);
        return ExitCodes.OK;
      } catch (QueueException | IllegalArgumentException e) {
        err.println("stepwarden: " + e.getMessage());
        return e.getMessage() != null && e.getMessage().contains(":") && e.getMessage()
            .matches("(?s).*:\\d+:\\d+:.*") ? ExitCodes.CONFIG : ExitCodes.USAGE;
      }
    }
  }

  static Instant parseTime(String text, Instant now, ZoneId zone) {
    return parseTime(text, now, zone, "--at");
  }

  static Instant parseTime(String text, Instant now, ZoneId zone, String option) {
    try {
      if (text.matches("\\d{1,2}:\\d{2}")) {
        LocalTime t = LocalTime.parse(text.length() == 4 ? "0" + text : text);
        LocalDateTime today = LocalDate.ofInstant(now, zone).atTime(t);
        Instant i = today.atZone(zone).toInstant();
        return i.isAfter(now) ? i : today.plusDays(1).atZone(zone).toInstant();
      }
      if (text.endsWith("Z") || text.matches(".*[+-]\\d{2}:\\d{2}$")) {
        return java.time.OffsetDateTime.parse(text).toInstant();
      }
      return LocalDateTime.parse(text).atZone(zone).toInstant();
    } catch (DateTimeParseException e) {
      throw new IllegalArgumentException(option + " '" + text + "': give HH:MM, YYYY-MM-DDTHH:MM or"
          + " an ISO instant such as 2026-03-01T22:00:00Z");
    }
  }

  @Command(name = "list", mixinStandardHelpOptions = true, description = "Show every job: waiting, running and done.")
  static final class ListJobs implements Callable<Integer> {
    @Spec
    CommandSpec spec;

    @Mixin
    Where where = new Where();

    @Option(names = "--json", description = "One JSON object a line.")
    boolean json;

    @Override
    public Integer call() {
      PrintWriter out = spec.commandLine().getOut();
      try (Queue q = Queue.open(where.settings(false, null))) {
        List<JobView> jobs = q.list();
        if (json) {
          for (JobView v : jobs) {
            out.println(JobView.json(v));
          }
          return ExitCodes.OK;
        }
        out.printf("%-28s %-15s %4s  %-24s %s%n", "JOB", "STATUS", "PRIO", "NEXT/OUTCOME",
            "RUN DIR");
        for (JobView v : jobs) {
          String status = v.status() + ("after".equals(v.status()) ? " " + v.after() : "");
          String detail = v.next() != null && !"running".equals(v.status()) ? v.next().toString()
              : v.due() && !"running".equals(v.status()) ? "due (next free slot)"
              : v.outcome() == null ? "" : v.outcome() + " (exit " + v.exitCode() + ")";
          out.printf("%-28s %-15s %4d  %-24s %s%n", v.id(), status, v.priority(), detail,
              v.runDir() == null ? "" : v.runDir());
        }
        return ExitCodes.OK;
      } catch (QueueException | IllegalArgumentException e) {
        spec.commandLine().getErr().println("stepwarden: " + e.getMessage());
        return ExitCodes.USAGE;
      }
    }
  }

  @Command(name = "cancel", mixinStandardHelpOptions = true, description = "Cancel a job: a waiting one never starts, a running"
      + " one is stopped (trainer included) by the serve that runs it.")
  static final class Cancel implements Callable<Integer> {
    @Spec
    CommandSpec spec;

    @Mixin
    Where where = new Where();

    @Parameters(paramLabel = "JOB", description = "The job id (see queue list).")
    String id;

    @Override
    public Integer call() {
      try (Queue q = Queue.open(where.settings(false, null))) {
        JobView v = q.cancel(id);
        spec.commandLine().getOut().println(v.id() + ": " + ("running".equals(v.status())
            ? "cancel requested; its serve stops it within a few seconds" : v.status()));
        return ExitCodes.OK;
      } catch (QueueException | IllegalArgumentException e) {
        spec.commandLine().getErr().println("stepwarden: " + e.getMessage());
        return ExitCodes.USAGE;
      }
    }
  }

  @Command(name = "purge", mixinStandardHelpOptions = true, description = "Forget ended jobs"
      + " (done, cancelled, failed, median-stopped) that ended before a date. Their run"
      + " directories stay where they are.",
      footer = {"", "Examples:", "  stepwarden queue purge --before 2026-11-01",
          "  stepwarden queue purge --before 2026-11-01T12:00:00Z"})
  static final class Purge implements Callable<Integer> {
    @Spec
    CommandSpec spec;

    @Mixin
    Where where = new Where();

    @Option(names = "--before", paramLabel = "DATE", required = true, description = "YYYY-MM-DD"
        + " (local midnight), YYYY-MM-DDTHH:MM (local) or an ISO instant.")
    String before;

    @Override
    public Integer call() {
      Instant when;
      try {
        when = before.matches("\\d{4}-\\d{2}-\\d{2}") ? LocalDate.parse(before)
            .atStartOfDay(ZoneId.systemDefault()).toInstant()
            : parseTime(before, Instant.now(), ZoneId.systemDefault(), "--before");
      } catch (IllegalArgumentException | DateTimeParseException e) {
        spec.commandLine().getErr().println("stepwarden: --before '" + before + "': give"
            + " YYYY-MM-DD, YYYY-MM-DDTHH:MM or an ISO instant such as 2026-11-01T00:00:00Z");
        return ExitCodes.USAGE;
      }
      try (Queue q = Queue.open(where.settings(false, null))) {
        int n = q.purge(when);
        spec.commandLine().getOut().println("forgot " + n + " ended job(s) that ended before "
            + when + "; their run directories are untouched");
        return ExitCodes.OK;
      } catch (QueueException | IllegalArgumentException e) {
        spec.commandLine().getErr().println("stepwarden: " + e.getMessage());
        return ExitCodes.USAGE;
      }
    }
  }
}
