package dev.stepwarden.rules;

import java.nio.file.Path;

/**
 * A guard file that cannot be used, with the place (file, line, column) and the fix.
 *
 * <p>This is the only exception the loader lets escape; the CLI maps it to exit code 78 and prints
 * {@link #getMessage()} as it is, never a stack trace.
 */
public final class ConfigException extends Exception {
  private final String file;
  private final int line;
  private final int column;
  private final String problem;

  ConfigException(Path file, int line, int column, String problem) {
    super(format(file, line, column, problem));
    this.file = file == null ? "<guard file>" : file.toString();
    this.line = line;
    this.column = column;
    this.problem = problem;
  }

  private static String format(Path file, int line, int column, String problem) {
    String where = file == null ? "<guard file>" : file.toString();
    return where + ":" + Math.max(line, 1) + ":" + Math.max(column, 1) + ": " + problem;
  }

  public String file() {
    return file;
  }

  /** 1-based line of the offending token. */
  public int line() {
    return Math.max(line, 1);
  }

  /** 1-based column of the offending token. */
  public int column() {
    return Math.max(column, 1);
  }

  /** The message without the place. */
  public String problem() {
    return problem;
  }
}
