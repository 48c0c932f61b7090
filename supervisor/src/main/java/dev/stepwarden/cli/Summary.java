package dev.stepwarden.cli;

import dev.stepwarden.supervise.Supervisor;
import java.io.PrintWriter;
import java.util.Locale;

/** The five lines printed when a run ends: where things are, how it ended, what to use. */
final class Summary {
  private Summary() {}

  /** Numbers with four significant digits: the final rate read 0.0017970102999144335. */
  static void print(Supervisor.Result r, PrintWriter out) {
    out.println("run directory:  " + r.runDir());
    out.println("audit log:      " + r.auditLog());
    out.println("outcome:        " + r.outcome().name().toLowerCase(Locale.ROOT).replace('_', ' ')
        + " (exit " + r.outcome().exitCode() + "): " + r.reason());
    out.println("interventions:  " + r.interventions() + "; final learning rate "
        + String.format(Locale.ROOT, "%.4g", r.finalRate()));
    out.println("best:           " + (Double.isNaN(r.bestValidation()) ? "no validation value"
        : String.format(Locale.ROOT, "validation %.4g at step %d", r.bestValidation(),
            r.bestValidationStep()))
        + r.bestCheckpoint().map(e -> "; use checkpoint " + (e.vault() != null ? e.vault()
            + " (vault copy of " + e.path().getFileName() + ", step " + e.step() : e.path()
            + " (step " + e.step()) + String.format(Locale.ROOT, ", validation %.4g measured"
            + " for it", e.validation()) + ")")
            .orElse("; no checkpoint with a validation value recorded"));
    out.flush();
  }
}
