package dev.stepwarden.process;

import java.io.File;
import java.io.FileOutputStream;
import java.io.IOException;
import java.io.OutputStream;
import java.nio.file.FileAlreadyExistsException;
import java.nio.file.Files;
import java.nio.file.Path;
import java.nio.file.attribute.PosixFilePermission;
import java.nio.file.attribute.PosixFilePermissions;
import java.time.Duration;
import java.util.ArrayList;
import java.util.EnumSet;
import java.util.LinkedHashSet;
import java.util.List;
import java.util.Objects;
import java.util.Optional;
import java.util.OptionalInt;
import java.util.Set;
import java.util.concurrent.CompletableFuture;
import java.util.concurrent.ConcurrentHashMap;
import java.util.concurrent.ExecutionException;
import java.util.concurrent.TimeUnit;
import java.util.concurrent.atomic.AtomicInteger;
import java.util.concurrent.atomic.AtomicReference;

/**
 * One running trainer: the user's unmodified command, its output pumps, and a stop that ends its
 * whole process tree.
 *
 * <h2>Design note</h2>
 *
 * <p><b>Launch.</b> The argv runs directly (no shell, so spaces and metacharacters arrive
 * verbatim), wrapped as {@code setpriv --pdeathsig KILL -- setsid -- ARGV}. Both helpers exec in
 * place, so {@link #pid()} is the trainer's own pid and, thanks to {@code setsid}, also its session
 * and process-group id: everything the trainer forks (data-loader workers, shells, ...) shares the
 * group unless it moves out on purpose. stdin is {@code /dev/null}. The helpers are looked up at
 * fixed paths and probed once; when absent the trainer runs unwrapped (see Fallback).
 *
 * <p><b>Why a launcher thread.</b> Linux delivers the parent-death signal when the <em>thread</em>
 * that forked the child exits, not the process. A trainer forked from a short-lived thread (a
 * request handler, a Quartz worker, a test) would be SIGKILLed the moment that thread ends. So
 * every trainer is forked by its own daemon launcher thread that then just waits for the trainer's
 * exit, keeping the parent-death binding until the trainer is gone. (setpriv arms the signal a
 * moment after the fork; should the forking thread already be gone by then, the child has been
 * handed to a sibling thread and the binding lands there, which is no safer. Likewise a supervisor
 * that dies within that millisecond leaves the trainer unarmed.)
 *
 * <p><b>If the supervisor JVM is SIGKILLed</b> (or crashes, or is OOM-killed): the launcher
 * thread dies with it, so the kernel SIGKILLs the trainer (its pdeathsig). That signal reaches only
 * the trainer itself (it is not inherited over fork). Its descendants learn of the loss through the
 * pipes: the read ends die with the JVM, so their next write to stdout/stderr fails with EPIPE,
 * which kills them by SIGPIPE or raises an error (Python ignores SIGPIPE and raises
 * {@code BrokenPipeError}). A descendant that neither writes nor watches its parent (a silent
 * {@code sleep}) survives as an orphan. Many frameworks' worker processes poll their parent and exit
 * on their own. There is no grace and no final checkpoint in this path; resume works from the last
 * checkpoint written. On an ordinary JVM exit (including SIGTERM/SIGINT to the supervisor) a
 * shutdown hook runs {@link #stop()} on every live trainer first, so they get TERM and their grace.
 *
 * <p><b>Pumps.</b> stdout and stderr each have a pump thread reading 64 KiB chunks: raw bytes go
 * to the log through a buffer that is flushed whenever the pipe is empty (so a tailer sees complete
 * output, without a syscall per line); complete lines go to the echo and, through a bounded queue
 * and a second thread per stream, to the {@link LineListener}.
 * The pumps never stop draining, so a trainer never blocks on a full pipe because of a log error or
 * a listener exception. Line rules are in {@link LaunchSpec#maxLineChars()} and the listener docs:
 * split on {@code '\n'}, drop a {@code '\r'} before it, keep what follows the last other
 * {@code '\r'} (progress bars), cut lines longer than the limit (counted in
 * {@link #oversizedLines()}), decode UTF-8 leniently. The log always has every byte.
 *
 * <p><b>Stop.</b> TERM to the group ({@code kill -s TERM -- -PGID}, atomic against processes
 * forked a moment ago), plus to descendants that left the group; wait up to the grace until the
 * trainer, every running group member and every known descendant are gone; then KILL the same set.
 * This runs even when the trainer itself has already exited but members of its group linger. The
 * trainer is reaped by the JDK, so it is never left a zombie; reaping grandchildren (whose parent
 * died) is the kernel's job via PID 1 or a subreaper: in a container, run with an init
 * ({@code docker run --init}) or orphans stay zombies. Zombies count as gone here.
 *
 * <p><b>Descendants that leave the group.</b> A worker that calls {@code setsid()} is no longer
 * reached by the group signal, and once its parent exits it is re-parented to PID 1, so
 * {@code /proc} no longer ties it to the trainer. The launcher thread therefore notes the
 * trainer's descendants every 250 ms while it waits ({@link ProcessHandle#descendants()}, a walk
 * of {@code /proc} by parent pid) and stop signals every noted one still alive (the handle's start
 * time guards against a reused pid). Making the supervisor a child subreaper
 * ({@code prctl(PR_SET_CHILD_SUBREAPER)}) would catch even a worker that forks, leaves and loses
 * its parent within those 250 ms, but Java 17 cannot call prctl without a native library (JNI)
 * or the foreign-function API (an incubator module in 17, which the build would have to enable
 * and whose use warns): the tracking is the gap we accept and name here.
 *
 * <p><b>Fallback</b> (no {@code setsid}): the trainer shares the supervisor's group, which must
 * never be signalled, so stop walks {@link ProcessHandle#descendants()} instead, refreshed while it
 * waits. It cannot reach a grandchild that was already orphaned. Without {@code setpriv} the trainer
 * outlives a SIGKILLed supervisor.
 *
 * <p><b>JDK pipe caveat.</b> When the trainer process itself exits, the JDK drains what is in the
 * pipe and closes it at the pump's next read. Output written later by leftover group members is
 * not captured, and those writers get EPIPE. A leftover that holds the pipe open but writes nothing
 * keeps the pump's read, and so {@link #waitFor()}, waiting; {@link #stop()} ends that. Callers
 * that must not hang use {@link #waitFor(Duration)} and then {@link #close()}.
 */
public final class TrainerProcess implements AutoCloseable {
  private static final Duration KILL_WAIT = Duration.ofSeconds(5);
  private static final Duration PUMP_WAIT = Duration.ofSeconds(2);
  private static final Duration GROUP_CONFIRM_WAIT = Duration.ofSeconds(2);
  /** How often the launcher thread notes the trainer's descendants (a /proc walk each). */
  private static final Duration TRACK_EVERY = Duration.ofMillis(250);
  private static final Set<TrainerProcess> LIVE = ConcurrentHashMap.newKeySet();
  private static final AtomicInteger SEQUENCE = new AtomicInteger();
  /** Set by {@link #hurryAll}: the rest of the grace is skipped, KILL follows at once. */
  private volatile boolean hurry;

  static {
    try {
      Runtime.getRuntime().addShutdownHook(
          new Thread(TrainerProcess::stopAllOnShutdown, "stepwarden-trainer-shutdown"));
    } catch (IllegalStateException shuttingDown) {
      // first used while the JVM is already exiting: nothing left to protect
    }
  }

  private final LaunchSpec spec;
  private final LineListener listener;
  private final ProcessTools tools;
  private final List<String> launchedCommand;
  private final Process process;
  private final long pid;
  private final boolean groupMode;
  private final boolean ownGroupConfirmed;
  private final LinePump out;
  private final LinePump err;
  private final AtomicReference<Throwable> firstFailure = new AtomicReference<>();
  private final Object stopLock = new Object();
  /**
   * Every descendant seen while the trainer lived, sampled by the launcher thread: a worker that
   * called setsid() has left the group, and once its parent is gone {@code /proc} no longer
   * links it to the trainer, so it is remembered here to be stopped with the tree.
   */
  private final Set<ProcessHandle> known;
  private volatile StopResult stopResult;
  private boolean stopInterrupted; // guarded by stopLock

  private TrainerProcess(LaunchSpec spec, LineListener listener, ProcessTools tools,
      List<String> launchedCommand, Process process, OutputStream outLog, OutputStream errLog,
      Set<ProcessHandle> known) {
    this.spec = spec;
    this.known = known;
    this.listener = listener;
    this.tools = tools;
    this.launchedCommand = List.copyOf(launchedCommand);
    this.process = process;
    this.pid = process.pid();
    this.groupMode = tools.setsid().isPresent();
    this.out = new LinePump(process.getInputStream(), TrainerStream.STDOUT, outLog, listener,
        spec.echo() ? System.out : null, spec.maxLineChars(), this::recordFailure);
    this.err = new LinePump(process.getErrorStream(), TrainerStream.STDERR, errLog, listener,
        spec.echo() ? System.err : null, spec.maxLineChars(), this::recordFailure);
    startDaemon(out, "stepwarden-pump-stdout-" + pid);
    startDaemon(err, "stepwarden-pump-stderr-" + pid);
    this.ownGroupConfirmed = groupMode && awaitOwnGroup();
  }

  /**
   * Launches the trainer and starts pumping its output.
   *
   * @throws IOException when the program is not found, a log cannot be opened or the OS refuses to
   *     start the process; the message names the program or file
   */
  public static TrainerProcess start(LaunchSpec spec, LineListener listener) throws IOException {
    return start(spec, listener, ProcessTools.system());
  }

  static TrainerProcess start(LaunchSpec spec, LineListener listener, ProcessTools tools)
      throws IOException {
    Objects.requireNonNull(spec, "spec");
    Objects.requireNonNull(listener, "listener");
    checkProgram(spec);
    List<String> argv = tools.wrap(spec.command());
    ProcessBuilder pb = new ProcessBuilder(argv)
        .directory(spec.workingDirectory().toFile())
        .redirectInput(new File("/dev/null"));
    pb.environment().putAll(spec.environment());
    OutputStream outLog = null;
    OutputStream errLog = null;
    Process p;
    Set<ProcessHandle> known = ConcurrentHashMap.newKeySet();
    try {
      outLog = openLog(spec.stdoutLog(), "stdout");
      errLog = openLog(spec.stderrLog(), "stderr");
      p = spawnOnLauncherThread(pb, spec, "stepwarden-launcher-" + SEQUENCE.incrementAndGet(),
          known);
    } catch (IOException | RuntimeException e) {
      closeQuietly(outLog);
      closeQuietly(errLog);
      throw e;
    }
    TrainerProcess tp = new TrainerProcess(spec, listener, tools, argv, p, outLog, errLog,
        known);
    LIVE.add(tp);
    p.onExit().thenRun(tp::forgetIfFinished);
    return tp;
  }

  /** Stops this trainer's tree (if still running) and launches {@code next} with the same listener. */
  public TrainerProcess restart(LaunchSpec next) throws IOException {
    stop();
    return start(next, listener, tools);
  }

  /** The trainer's pid; with {@code setsid} also its process-group and session id. */
  public long pid() {
    return pid;
  }

  /** Whether the trainer process itself is still running (its group may outlive it). */
  public boolean isAlive() {
    return process.isAlive();
  }

  public LaunchSpec spec() {
    return spec;
  }

  /** The argv actually executed, wrapping included: record it in the run directory. */
  public List<String> launchedCommand() {
    return launchedCommand;
  }

  /** True when the trainer was seen leading its own process group (setsid took effect). */
  public boolean ownsProcessGroup() {
    return ownGroupConfirmed;
  }

  /** True when the trainer was armed to be SIGKILLed should the supervisor JVM die. */
  public boolean diesWithSupervisor() {
    return tools.setpriv().isPresent();
  }

  /**
   * Waits for the trainer to exit and both pumps to drain (every line delivered, logs closed).
   *
   * @return the exit code (128 + signal number when a signal ended it)
   */
  public int waitFor() throws InterruptedException {
    int code = process.waitFor();
    out.await();
    err.await();
    return code;
  }

  /**
   * Runs {@code action} once the trainer has exited and both pumps have drained, that is when
   * {@link #waitFor(Duration)} would no longer wait (on a JDK thread: keep it short). Lets a
   * caller that polls wake at once instead of at its next tick.
   */
  public void whenDrained(Runnable action) {
    CompletableFuture.allOf(process.onExit(), out.finished(), err.finished())
        .thenRun(action);
  }

  /**
   * The trainer's own exit code once the trainer process itself has exited, whether or not its
   * output has drained (a leftover child may hold the pipe open); empty while it runs.
   */
  public OptionalInt exitedItself() {
    return process.isAlive() ? OptionalInt.empty() : OptionalInt.of(process.exitValue());
  }

  /** Like {@link #waitFor()} but gives up after {@code timeout}: empty when still running. */
  public OptionalInt waitFor(Duration timeout) throws InterruptedException {
    long deadline = System.nanoTime() + timeout.toNanos();
    if (!process.waitFor(remaining(deadline), TimeUnit.NANOSECONDS)
        || !out.await(remaining(deadline), TimeUnit.NANOSECONDS)
        || !err.await(remaining(deadline), TimeUnit.NANOSECONDS)) {
      return OptionalInt.empty();
    }
    return OptionalInt.of(process.exitValue());
  }

  /**
   * Ends the trainer's whole tree: TERM, up to {@link LaunchSpec#stopGrace()} to exit, then KILL.
   * Idempotent and thread-safe: later calls return the first call's result. If the calling thread
   * is interrupted, the rest of the grace is skipped and KILL follows at once (the interrupt flag is
   * kept); the stop itself always completes.
   */
  public StopResult stop() {
    synchronized (stopLock) {
      if (stopResult != null) {
        return stopResult;
      }
      long t0 = System.nanoTime();
      stopInterrupted = Thread.interrupted();
      Set<ProcessHandle> tree = new LinkedHashSet<>();
      collectTree(tree);
      boolean wasAlive = !treeGone(tree);
      boolean killed = false;
      if (wasAlive) {
        signalTree(tree, false);
        if (stopInterrupted || hurry || !awaitGone(tree, spec.stopGrace(), true)) {
          collectTree(tree);
          signalTree(tree, true);
          killed = true;
          awaitGone(tree, KILL_WAIT, false);
        }
      }
      OptionalInt code = reap();
      awaitPumps();
      stopResult = new StopResult(wasAlive, killed, code, Duration.ofNanos(System.nanoTime() - t0));
      LIVE.remove(this);
      if (stopInterrupted) {
        Thread.currentThread().interrupt();
      }
      return stopResult;
    }
  }

  /**
   * Writes what the logs' buffers hold to the files now. The pumps do so by themselves within
   * {@link LinePump#FLUSH_MILLIS} of a write and at the end of the output; a supervisor calls this
   * before it acts on a decision, so the logs hold the lines the decision was made on.
   */
  public void flushLogs() {
    out.flushLog();
    err.flushLog();
  }

  /** Lines handed to the listener so far, both streams. */
  public long linesRead() {
    return out.lines() + err.lines();
  }

  public long linesRead(TrainerStream stream) {
    return stream == TrainerStream.STDOUT ? out.lines() : err.lines();
  }

  /** Lines longer than {@link LaunchSpec#maxLineChars()} that were handed over cut. */
  public long oversizedLines() {
    return out.oversized() + err.oversized();
  }

  /** The first listener exception or log I/O error the pumps survived, if any. */
  public Optional<Throwable> firstPumpFailure() {
    return Optional.ofNullable(firstFailure.get());
  }

  /** Stops the tree when anything of it still runs; otherwise just records the outcome. */
  @Override
  public void close() {
    stop();
  }

  @Override
  public String toString() {
    return "TrainerProcess[pid=" + pid + ", alive=" + isAlive() + ", command=" + spec.command() + "]";
  }

  // ---- launch ----

  /**
   * Forks on a fresh thread that stays alive until the trainer exits: that thread is the trainer's
   * parent for PR_SET_PDEATHSIG (see the design note).
   */
  private static Process spawnOnLauncherThread(ProcessBuilder pb, LaunchSpec spec, String name,
      Set<ProcessHandle> known) throws IOException {
    CompletableFuture<Process> started = new CompletableFuture<>();
    Thread launcher = new Thread(() -> {
      Process p;
      try {
        p = pb.start();
      } catch (Throwable e) {
        started.completeExceptionally(e);
        return;
      }
      started.complete(p);
      while (true) {
        try {
          if (p.waitFor(TRACK_EVERY.toMillis(), TimeUnit.MILLISECONDS)) {
            return;
          }
          p.descendants().forEach(known::add);
        } catch (InterruptedException e) {
          // Nobody should interrupt us; leaving early would SIGKILL the trainer.
        }
      }
    }, name);
    launcher.setDaemon(true);
    launcher.start();
    boolean interrupted = false;
    try {
      while (true) {
        try {
          return started.get();
        } catch (InterruptedException e) {
          interrupted = true; // the fork takes milliseconds; never leave a trainer untracked
        } catch (ExecutionException e) {
          Throwable c = e.getCause();
          throw new IOException("could not start the trainer " + spec.command() + " in "
              + spec.workingDirectory() + ": " + c.getMessage(), c);
        }
      }
    } finally {
      if (interrupted) {
        Thread.currentThread().interrupt();
      }
    }
  }

  /**
   * The wrappers exec the program themselves, so a missing program would only surface as an exit
   * code: look it up first, the way execvp will (the trainer's PATH, relative to its directory).
   */
  static void checkProgram(LaunchSpec spec) throws IOException {
    String program = spec.command().get(0);
    Path wd = spec.workingDirectory();
    if (program.indexOf('/') >= 0) {
      Path p = wd.resolve(program).normalize();
      if (!Files.isRegularFile(p) || !Files.isExecutable(p)) {
        throw new IOException("trainer program " + p + (Files.exists(p)
            ? " is not an executable file; check its mode (chmod +x)"
            : " does not exist; check the command's first element"));
      }
      return;
    }
    String path = spec.environment().containsKey("PATH")
        ? spec.environment().get("PATH") : System.getenv("PATH");
    if (path == null) {
      path = "/bin:/usr/bin"; // glibc's execvp default
    }
    for (String dir : path.split(":", -1)) {
      Path p = (dir.isEmpty() ? wd : wd.resolve(dir)).resolve(program);
      if (Files.isRegularFile(p) && Files.isExecutable(p)) {
        return;
      }
    }
    throw new IOException("trainer program '" + program + "' was not found on the trainer's PATH ("
        + path + "); give an absolute path or add its directory to PATH in the environment");
  }

  private static OutputStream openLog(Optional<Path> file, String what) throws IOException {
    if (file.isEmpty()) {
      return null;
    }
    Path p = file.get();
    try {
      if (Files.notExists(p)) {
        try {
          Files.createFile(p, PosixFilePermissions.asFileAttribute(
              EnumSet.of(PosixFilePermission.OWNER_READ, PosixFilePermission.OWNER_WRITE)));
        } catch (FileAlreadyExistsException raced) {
          // someone else created it a moment ago: append to it
        } catch (UnsupportedOperationException notPosix) {
          // no POSIX modes on this file system: FileOutputStream creates it below
        }
      }
      return new FileOutputStream(p.toFile(), true); // an existing file keeps its mode
    } catch (IOException e) {
      throw new IOException("cannot open the " + what + " log " + p + ": " + e
          + "; check the directory's permissions and free space", e);
    }
  }

  /** Waits (briefly) until setsid has run, so that the trainer leads its own group from now on. */
  private boolean awaitOwnGroup() {
    long deadline = System.nanoTime() + GROUP_CONFIRM_WAIT.toNanos();
    long sleepMicros = 200;
    while (System.nanoTime() < deadline) {
      Optional<ProcessGroups.Stat> s = ProcessGroups.stat(pid);
      if (s.isEmpty() || !s.get().running()) {
        return false;
      }
      if (s.get().pgrp() == pid) {
        return true;
      }
      try {
        TimeUnit.MICROSECONDS.sleep(sleepMicros);
      } catch (InterruptedException e) {
        Thread.currentThread().interrupt();
        return false;
      }
      sleepMicros = Math.min(sleepMicros * 2, 20_000);
    }
    return false;
  }

  // ---- stop ----

  /**
   * Adds the trainer's current descendants (reachable while the trainer lives) and every
   * descendant noted earlier that still runs (a setsid() worker orphaned since).
   */
  private void collectTree(Set<ProcessHandle> tree) {
    if (process.isAlive()) {
      process.descendants().forEach(h -> {
        tree.add(h);
        known.add(h);
      });
    }
    for (ProcessHandle h : known) {
      if (h.isAlive()) {
        tree.add(h);
      }
    }
  }

  private boolean treeGone(Set<ProcessHandle> tree) {
    if (process.isAlive()) {
      return false;
    }
    if (groupMode && ProcessGroups.hasRunningMember(pid)) {
      return false;
    }
    for (ProcessHandle h : tree) {
      if (ProcessGroups.isRunning(h)) {
        return false;
      }
    }
    return true;
  }

  private void signalTree(Set<ProcessHandle> tree, boolean kill) {
    if (groupMode) {
      ProcessGroups.signalGroup(tools, pid, kill);
    }
    // Signal individually only what the group signal missed: one TERM each, never two (some
    // trainers treat a second TERM as "abandon the checkpoint and quit now").
    if (process.isAlive() && !inOurGroup(pid)) {
      ProcessGroups.signal(process.toHandle(), kill);
    }
    for (ProcessHandle h : tree) {
      if (ProcessGroups.isRunning(h) && !inOurGroup(h.pid())) {
        ProcessGroups.signal(h, kill);
      }
    }
  }

  private boolean inOurGroup(long member) {
    return groupMode
        && ProcessGroups.stat(member).map(s -> s.pgrp() == pid).orElse(false);
  }

  /**
   * Polls until the tree is gone or the wait is over; returns whether it is gone. An interrupt
   * ends the wait early (recorded in {@code stopInterrupted}); the KILL phase is never cut short
   * by a repeat because the flag is consumed here. {@link #hurryAll} ends a grace wait
   * ({@code isGrace}) early as well.
   */
  private boolean awaitGone(Set<ProcessHandle> tree, Duration wait, boolean isGrace) {
    long deadline = System.nanoTime() + wait.toNanos();
    long sleepMillis = 5;
    boolean grace = !stopInterrupted;
    while (!treeGone(tree)) {
      if (System.nanoTime() >= deadline || (isGrace && hurry)) {
        return false;
      }
      try {
        process.waitFor(Math.min(sleepMillis, Math.max(1, remaining(deadline) / 1_000_000)),
            TimeUnit.MILLISECONDS);
      } catch (InterruptedException e) {
        stopInterrupted = true;
        if (grace) {
          return false;
        }
      }
      collectTree(tree);
      sleepMillis = Math.min(sleepMillis * 2, 50);
    }
    return true;
  }

  private OptionalInt reap() {
    try {
      if (process.waitFor(KILL_WAIT.toMillis(), TimeUnit.MILLISECONDS)) {
        return OptionalInt.of(process.exitValue());
      }
    } catch (InterruptedException e) {
      stopInterrupted = true;
    }
    return process.isAlive() ? OptionalInt.empty() : OptionalInt.of(process.exitValue());
  }

  private void awaitPumps() {
    long deadline = System.nanoTime() + PUMP_WAIT.toNanos();
    try {
      out.await(remaining(deadline), TimeUnit.NANOSECONDS);
      err.await(remaining(deadline), TimeUnit.NANOSECONDS);
    } catch (InterruptedException e) {
      stopInterrupted = true;
    }
  }

  // ---- bookkeeping ----

  private void forgetIfFinished() {
    if ((!groupMode || !ProcessGroups.hasRunningMember(pid))
        && known.stream().noneMatch(ProcessGroups::isRunning)) {
      LIVE.remove(this);
    }
  }

  private void recordFailure(Throwable t) {
    if (firstFailure.compareAndSet(null, t)) {
      System.err.println("stepwarden: trainer " + pid + ": " + t.getMessage()
          + (t.getCause() == null ? "" : " (" + t.getCause() + ")"));
    }
  }

  /**
   * Makes the stop of every trainer alive in this JVM now (under way or still to be called) skip
   * the rest of its grace and KILL at once: what a second SIGTERM or SIGINT to a stopping serve asks for. No thread is
   * interrupted, so no audit write in progress is disturbed.
   */
  public static void hurryAll() {
    for (TrainerProcess tp : LIVE) {
      tp.hurry = true;
    }
  }

  private static void stopAllOnShutdown() {
    List<Runnable> stops = new ArrayList<>();
    for (TrainerProcess tp : LIVE) {
      stops.add(tp::stop);
    }
    Stops.allAtOnce(stops);
  }

  private static void startDaemon(Runnable r, String name) {
    Thread t = new Thread(r, name);
    t.setDaemon(true);
    t.start();
  }

  private static long remaining(long deadline) {
    return Math.max(0, deadline - System.nanoTime());
  }

  private static void closeQuietly(OutputStream s) {
    if (s != null) {
      try {
        s.close();
      } catch (IOException ignored) {
        // already failing; the first error is the one reported
      }
    }
  }
}
