package dev.stepwarden.metrics;

import java.util.regex.Matcher;
import java.util.regex.Pattern;

/**
 * {@code step=10 loss=0.31 lr=1e-3}, also {@code key: value}, separated by spaces, commas or pipes.
 */
final class PairsLineParser implements LineParser {
  private static final Pattern PAIR =
      Pattern.compile("([A-Za-z_][A-Za-z0-9_./-]*)\\s*[=:]\\s*([^\\s,|;]+)");

  @Override
  public boolean parse(String line, Fields out) {
    Matcher m = PAIR.matcher(line);
    boolean any = false;
    while (m.find()) {
      double v = Decimals.parse(line, m.start(2), m.end(2));
      if (!Decimals.failed(v)) {
        out.put(m.group(1), v);
        any = true;
      }
    }
    return any;
  }
}
