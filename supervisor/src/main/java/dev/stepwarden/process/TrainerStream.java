package dev.stepwarden.process;

/** Which of the trainer's output streams a line came from. */
public enum TrainerStream {
  STDOUT,
  STDERR
}
