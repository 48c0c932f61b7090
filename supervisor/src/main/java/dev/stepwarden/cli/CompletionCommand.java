package dev.stepwarden.cli;

import java.util.concurrent.Callable;
import picocli.AutoComplete;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Spec;

@Command(name = "completion", description = "Print a bash completion script (zsh: load it after"
    + " 'autoload -U +X bashcompinit && bashcompinit'). Use: source <(stepwarden completion)")
final class CompletionCommand implements Callable<Integer> {
  @Spec
  CommandSpec spec;

  @Override
  public Integer call() {
    spec.commandLine().getOut().print(AutoComplete.bash("stepwarden",
        spec.commandLine().getParent()));
    return ExitCodes.OK;
  }
}
