package dev.stepwarden.cli;

import java.io.PrintWriter;
import java.util.concurrent.Callable;
import picocli.AutoComplete;
import picocli.CommandLine.Command;
import picocli.CommandLine.Model.CommandSpec;
import picocli.CommandLine.Option;
import picocli.CommandLine.Spec;

@Command(name = "completion", description = "Print a completion script for bash (the default)"
    + " or zsh, generated from the very commands and options of this build.",
    footer = {"", "Use:", "  source <(stepwarden completion)                 # bash, e.g. in ~/.bashrc",
        "  source <(stepwarden completion --shell zsh)     # zsh, e.g. in ~/.zshrc"})
final class CompletionCommand implements Callable<Integer> {
  enum Shell { bash, zsh }

  @Spec
  CommandSpec spec;

  @Option(names = "--shell", paramLabel = "SHELL", description = "bash or zsh (default: bash).")
  Shell shell = Shell.bash;

  @Override
  public Integer call() {
    PrintWriter out = spec.commandLine().getOut();
    if (shell == Shell.zsh) {
      // zsh runs the bash script through its bash-compatibility layer
      out.print("autoload -U +X compinit && compinit\nautoload -U +X bashcompinit"
          + " && bashcompinit\n");
    }
    out.print(AutoComplete.bash("stepwarden", spec.commandLine().getParent()));
    out.flush();
    return ExitCodes.OK;
  }
}
