package dev.stepwarden.cli;

import dev.stepwarden.control.ControlFile;
import java.io.IOException;
import java.io.InputStream;
import java.io.PrintWriter;
import java.nio.charset.StandardCharsets;
import java.util.concurrent.Callable;
import picocli.CommandLine.Command;
import picocli.CommandLine.Parameters;
import picocli.CommandLine.Spec;
import picocli.CommandLine.Model.CommandSpec;

@Command(name = "helper", description = "Print the trainer-side helper for the control file:"
    + " a single file without dependencies that polls STEPWARDEN_CONTROL and hands back the"
    + " current learning rate.",
    footer = {"", "Example:", "  stepwarden helper python > stepwarden_control.py",
        "  stepwarden helper java > StepwardenControl.java"})
final class HelperCommand implements Callable<Integer> {
  enum Language { python, java }

  @Spec
  CommandSpec spec;

  @Parameters(index = "0", paramLabel = "LANGUAGE", description = "python or java.")
  Language language;

  @Override
  public Integer call() throws IOException {
    String resource = language == Language.python ? ControlFile.PYTHON_HELPER
        : ControlFile.JAVA_HELPER;
    try (InputStream in = HelperCommand.class.getResourceAsStream(resource)) {
      if (in == null) {
        spec.commandLine().getErr().println("stepwarden: the helper " + resource
            + " is missing from this build");
        return ExitCodes.INTERNAL;
      }
      PrintWriter out = spec.commandLine().getOut();
      out.print(new String(in.readAllBytes(), StandardCharsets.UTF_8));
      out.flush();
      return ExitCodes.OK;
    }
  }
}
