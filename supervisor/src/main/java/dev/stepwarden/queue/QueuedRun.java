package dev.stepwarden.queue;

import dev.stepwarden.rules.ConfigException;
import dev.stepwarden.rules.GuardFile;
import dev.stepwarden.rules.GuardFiles;
import dev.stepwarden.supervise.RunDirectory;
import dev.stepwarden.supervise.RunObserver;
import dev.stepwarden.supervise.RunOutcome;
import dev.stepwarden.supervise.RunOptions;
import dev.stepwarden.supervise.Supervisor;
import dev.stepwarden.telemetry.RunMeters;
import java.io.IOException;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Instant;
import java.time.ZoneOffset;
import java.time.format.DateTimeFormatter;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;
import org.quartz.DisallowConcurrentExecution;
import org.quartz.Job;
import org.quartz.JobDataMap;
import org.quartz.JobDetail;
import org.quartz.JobExecutionContext;
import org.quartz.JobExecutionException;
import org.quartz.JobKey;
import org.quartz.PersistJobDataAfterExecution;
import org.quartz.Scheduler;
import org.quartz.SchedulerException;
import org.quartz.impl.matchers.GroupMatcher;
import tools.jackson.databind.json.JsonMapper;

/**
 * One firing of a queued job: takes a slot, reads the run directory, and runs (or resumes, or
 * only records) the supervised run. Public only because Quartz instantiates it by name from the
 * job store; not part of the API (its class name is stored in the database: do not rename).
 *
 * <p>Why the supervisor runs in-process on the slot's thread and not in a child JVM: the meters
 * of every running job land in the one registry serve publishes; {@code queue cancel}, the median
 * rule and a serve shutdown reach the run through {@link Supervisor#interrupt} directly; and a
 * kill -9 of serve still cannot leave a trainer behind, because every trainer is launched with a
 * parent-death signal. The cost is that a supervisor bug that takes down the JVM takes down every
 * slot at once; recovery through the run directories then continues them all.
 */
@DisallowConcurrentExecution
@PersistJobDataAfterExecution
public final class QueuedRun implements Job {
  private static final JsonMapper JSON = JsonMapper.builder().build();
  private static final DateTimeFormatter STAMP = DateTimeFormatter.ofPattern("yyyyMMdd-HHmmss")
      .withZone(ZoneOffset.UTC);

  public QueuedRun() {}

  @Override
  public void execute(JobExecutionContext ctx) throws JobExecutionException {
    Night night;
    try {
      night = (Night) ctx.getScheduler().getContext().get(Night.CONTEXT_KEY);
    } catch (SchedulerException e) {
      throw new JobExecutionException(e);
    }
    JobDetail detail = ctx.getJobDetail();
    JobDataMap data = detail.getJobDataMap();
    String id = detail.getKey().getName();
    if ("cancelled".equals(data.getString(Queue.K_STATUS))) {
      return;
    }
    long scheduled = ctx.getScheduledFireTime().getTime();
    if (ctx.isRecovering()) {
      String orig = ctx.getTrigger().getJobDataMap().getString(
          Scheduler.FAILED_JOB_ORIGINAL_TRIGGER_FIRETIME_IN_MILLISECONDS);
      scheduled = orig == null ? scheduled : Long.parseLong(orig);
    }
    Path base = night.queue.settings().runs().resolve(id);
    if (data.getString(Queue.K_CRON) != null) {
      base = base.resolve(STAMP.format(Instant.ofEpochMilli(scheduled)));
    }
    Night.Active active = new Night.Active();
    night.active.put(id, active);
    int slot = night.slots.take();
    RunLock lock = null;
    try {
      lock = RunLock.acquire(base, night.node, holder -> night.say("job " + id + " waits for"
          + " its run directory, which another supervisor still holds: " + holder),
          () -> night.stopping || active.fenced != null);
      if (lock == null) {
        data.clearDirtyFlag(); // a stopping serve re-triggers it; a fenced one is not ours
        return;
      }
      data.remove(Queue.K_CANCEL);
      data.put(Queue.K_STATUS, "running");
      data.put(Queue.K_NODE, night.node);
      data.put(Queue.K_RUN_DIR, base.toString());
      Queue.putSafely(night.scheduler, detail);
      Map<String, Object> f = new LinkedHashMap<>();
      f.put("job", id);
      f.put("slot", slot);
      f.put("gpus", night.slots.gpus(slot));
      f.put("recovering", ctx.isRecovering());
      f.put("run_dir", base.toString());
      night.audit("job-start", f);
      night.say("job " + id + " started on slot " + slot + (ctx.isRecovering()
          ? " (recovering a run whose serve died)" : ""));
      Finished r = runIn(night, active, id, data, base, slot);
      if (active.fenced != null) {
        // another node continues (or will continue) the job: its record is that node's
        data.clearDirtyFlag();
        night.audit("job-given-up", Map.of("job", id, "why", active.fenced));
        night.say("job " + id + " given up here: " + active.fenced);
        return;
      }
      data.put(Queue.K_STATUS, r.status());
      if (r.outcome() != null) {
        data.put(Queue.K_OUTCOME, r.outcome());
      }
      data.put(Queue.K_EXIT, Integer.toString(r.exitCode()));
      data.put(Queue.K_RUN_DIR, r.runDir().toString());
      data.put(Queue.K_REASON, r.reason() == null ? "" : r.reason());
      if (Queue.ENDED.contains(r.status())) {
        data.put(Queue.K_ENDED, Instant.now().toString());
      }
      Map<String, Object> e = new LinkedHashMap<>();
      e.put("job", id);
      e.put("status", r.status());
      e.put("outcome", r.outcome());
      e.put("exit_code", r.exitCode());
      e.put("run_dir", r.runDir().toString());
      night.audit("job-end", e);
      night.say("job " + id + " " + r.status() + (r.outcome() == null ? ""
          : " (" + r.outcome() + ", exit " + r.exitCode() + ")"));
      if (Queue.ENDED.contains(r.status())) {
        // recorded before the dependents are released: they must find this job ended
        Queue.putSafely(night.scheduler, detail);
        night.jobEnded(id);
      }
    } catch (IOException e) {
      night.say("job " + id + ": cannot lock its run directory " + RunLock.file(base) + ": "
          + e.getMessage());
      data.put(Queue.K_STATUS, "failed");
      data.put(Queue.K_REASON, e.getMessage());
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
    } finally {
      if (lock != null) {
        lock.close();
      }
      night.active.remove(id);
      night.slots.give(slot);
    }
  }

  record Finished(String status, String outcome, int exitCode, String reason, Path runDir) {}

  private static Finished runIn(Night night, Night.Active active, String id, JobDataMap data,
      Path base, int slot) {
    try {
      Path dir = latestAttempt(base);
      RunState state = RunState.of(dir);
      if (state.kind() == RunState.Kind.ENDED) {
        // Ended before serve could record it: record only, never run twice.
        return finished(state, dir);
      }
      boolean resume = false;
      if (state.kind() == RunState.Kind.UNFINISHED) {
        if (Files.exists(dir.resolve(RunDirectory.STATE))) {
          resume = true;
          night.audit("job-resume", Map.of("job", id, "run_dir", dir.toString()));
        } else {
          // its supervisor died before the first launch saved a state: start it again, in a
          // new attempt directory (the old one is kept as it is)
          Path next = nextAttempt(base, dir);
          night.audit("job-retry", Map.of("job", id, "unfinished", dir.toString(),
              "new_run_dir", next.toString(), "why", "its supervisor died before the first"
                  + " launch; nothing ran, so the job starts again"));
          dir = next;
        }
      }
      data.put(Queue.K_ATTEMPTS, Integer.toString(attemptNumber(base, dir)));
      return supervise(night, active, id, data, dir, slot, resume);
    } catch (IOException | IllegalStateException e) {
      return new Finished("failed", "internal-error", 1, e.getMessage(), base);
    } catch (ConfigException e) {
      return new Finished("failed", "config-error", 78, e.getMessage(), base);
    } catch (InterruptedException e) {
      Thread.currentThread().interrupt();
      return new Finished("interrupted", "interrupted", 130, "interrupted", base);
    } catch (Exception e) {
      return new Finished("failed", "internal-error", 1, e.toString(), base);
    }
  }

  private static Finished finished(RunState s, Path dir) {
    return new Finished("median-stopped".equals(s.outcome()) ? "median-stopped" : "done",
        s.outcome(), s.exitCode(), s.reason(), dir);
  }

  /**
   * Runs the job's supervisor, fresh or resumed: either way a full job of this slot, with the
   * slot's GPUs and environment computed now, its meters, the median rule, cancel and quiet
   * output.
   */
  private static Finished supervise(Night night, Night.Active active, String id,
      JobDataMap data, Path dir, int slot, boolean resume)
      throws IOException, InterruptedException, ConfigException {
    GuardFile g = GuardFiles.parse(data.getString(Queue.K_GUARDS).getBytes(
        StandardCharsets.UTF_8), Path.of(data.getString(Queue.K_RULES)));
    Map<String, String> slotEnv = new LinkedHashMap<>();
    slotEnv.put("STEPWARDEN_QUEUE_JOB", id);
    slotEnv.put("STEPWARDEN_SLOT", Integer.toString(slot));
    // a slot without GPUs leaves serve's own CUDA_VISIBLE_DEVICES (a resumed run drops the
    // value its earlier slot had)
    slotEnv.put("CUDA_VISIBLE_DEVICES", night.slots.gpus(slot));
    // the run directory keeps the guard file as queued (with the overrides)
    Home.privateDirectories(dir.getParent());
    Path snapshot = dir.resolveSibling(dir.getFileName() + ".guards.yaml");
    if (!resume) {
      Files.writeString(Home.privateFile(snapshot), data.getString(Queue.K_GUARDS),
          StandardCharsets.UTF_8);
    }
    g = new GuardFile(snapshot, g.run(), g.read(), g.steer(), g.checkpoints(), g.guards(),
        g.limits());

    List<RunObserver> observers = new ArrayList<>();
    RunMeters meters = null;
    if (night.options.registry() != null) {
      meters = new RunMeters(night.options.registry(), id, g.run().learningRate(), null);
      observers.add(meters);
    }
    String cohort = Queue.cohort(data);
    if (cohort != null && night.options.median()) {
      List<MedianStopping.Curve> done = completedRuns(night, cohort, id);
      observers.add(MedianStopping.observer(night.options.medianSeries(), done,
          night.options.quorum(), night.options.fromStep(), v -> {
            // on a pump thread: record now, stop from another thread (stopping drains pumps)
            medianStop(night, id, dir, v);
            Supervisor s = active.supervisor;
            Night.offThread("stepwarden-median", () -> s.interrupt(v.summary()));
          }));
    }
    RunOptions options = new RunOptions(dir, true, null,
        night.options.console(), all(observers));
    Supervisor s;
    if (resume) {
      s = Supervisor.resume(dir, g, options, slotEnv);
    } else {
      Map<String, String> env = new LinkedHashMap<>(g.run().env());
      slotEnv.forEach((k, v) -> {
        if (v != null) {
          env.put(k, v);
        }
      });
      s = new Supervisor(g.withRun(new GuardFile.Run(g.run().name(), g.run().command(),
          g.run().learningRate(), g.run().workdir(), env, g.run().stopGrace())), options);
    }
    active.supervisor = s;
    if (night.stopping || active.fenced != null) {
      return new Finished("interrupted", "interrupted", 130, "serve stopping", dir);
    }
    Supervisor.Result r;
    try {
      r = s.run();
    } finally {
      if (meters != null) {
        meters.close();
      }
    }
    if (night.cancelled.remove(id)) {
      return new Finished("cancelled", "interrupted", r.outcome().exitCode(), "queue cancel",
          dir);
    }
    RunState st = RunState.of(dir);
    if (st.kind() == RunState.Kind.ENDED) {
      return finished(st, dir);
    }
    String outcome = r.outcome().name().toLowerCase(Locale.ROOT).replace('_', '-');
    return new Finished(r.outcome() == RunOutcome.INTERRUPTED ? "interrupted" : "failed",
        outcome, r.outcome().exitCode(), r.reason(), dir);
  }

  private static void medianStop(Night night, String id, Path dir, MedianStopping.Verdict v) {
    Map<String, Object> f = new LinkedHashMap<>();
    f.put("job", id);
    f.put("rule", "median stopping (Golovin et al. 2017, s3.2)");
    f.put("step", v.step());
    f.put("best", v.best());
    f.put("median", v.median());
    f.put("completed_runs", v.completedRuns());
    f.put("running_averages", v.averages());
    f.put("summary", v.summary());
    night.audit("median-stop", f);
    try {
      Files.writeString(dir.resolve(RunState.MEDIAN_STOP), JSON.writeValueAsString(f) + "\n");
    } catch (IOException e) {
      night.say("cannot write " + dir.resolve(RunState.MEDIAN_STOP) + ": " + e.getMessage());
    }
  }

  /** The completed runs of a cohort, read from their run directories. */
  private static List<MedianStopping.Curve> completedRuns(Night night, String cohort,
      String self)
      throws IOException {
    List<MedianStopping.Curve> out = new ArrayList<>();
    try {
      for (JobKey k : night.scheduler.getJobKeys(GroupMatcher.jobGroupEquals(Queue.GROUP))) {
        JobDetail d = night.scheduler.getJobDetail(k);
        if (d == null || k.getName().equals(self)) {
          continue;
        }
        JobDataMap m = d.getJobDataMap();
        String dir = m.getString(Queue.K_RUN_DIR);
        if (cohort.equals(Queue.cohort(m)) && dir != null
            && ("done".equals(m.getString(Queue.K_STATUS))
                || "median-stopped".equals(m.getString(Queue.K_STATUS)))) {
          out.add(MedianStopping.read(k.getName(), Path.of(dir), night.options.medianSeries()));
        }
      }
    } catch (SchedulerException e) {
      throw new IOException("cannot read the cohort's runs: " + e.getMessage(), e);
    }
    return out;
  }

  static RunObserver all(List<RunObserver> list) {
    if (list.isEmpty()) {
      return RunObserver.NONE;
    }
    List<RunObserver> copy = List.copyOf(list);
    return new RunObserver() {
      @Override
      public void onSample(dev.stepwarden.metrics.Sample sample, double rate) {
        copy.forEach(o -> o.onSample(sample, rate));
      }

      @Override
      public void onDecision(dev.stepwarden.engine.Decision decision) {
        copy.forEach(o -> o.onDecision(decision));
      }

      @Override
      public void onLaunch(int attempt, String reason) {
        copy.forEach(o -> o.onLaunch(attempt, reason));
      }

      @Override
      public void onLines(long lines, long metricLines, long ignored) {
        copy.forEach(o -> o.onLines(lines, metricLines, ignored));
      }

      @Override
      public void onEnd(Supervisor.Result result) {
        copy.forEach(o -> o.onEnd(result));
      }
    };
  }

  /** {@code base}, {@code base.2}, {@code base.3}, ...: the newest one that exists. */
  static Path latestAttempt(Path base) {
    Path latest = base;
    for (int n = 2; Files.exists(base.resolveSibling(base.getFileName() + "." + n)); n++) {
      latest = base.resolveSibling(base.getFileName() + "." + n);
    }
    return latest;
  }

  static Path nextAttempt(Path base, Path current) {
    return base.resolveSibling(base.getFileName() + "." + (attemptNumber(base, current) + 1));
  }

  static int attemptNumber(Path base, Path dir) {
    if (dir.equals(base)) {
      return 1;
    }
    String n = dir.getFileName().toString().substring(base.getFileName().toString().length() + 1);
    return Integer.parseInt(n);
  }
}
