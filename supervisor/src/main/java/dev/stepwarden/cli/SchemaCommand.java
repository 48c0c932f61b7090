package dev.stepwarden.cli;

import dev.stepwarden.rules.Schema;
import java.util.concurrent.Callable;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Spec;

@Command(name = "schema", description = "Print the JSON Schema of the guard file (for editors).")
final class SchemaCommand implements Callable<Integer> {
  @Spec
  CommandSpec spec;

  @Override
  public Integer call() {
    spec.commandLine().getOut().println(Schema.json());
    return ExitCodes.OK;
  }
}
