/**
 * The trainer's process: {@link dev.stepwarden.process.TrainerProcess} launches the user's
 * command from a {@link dev.stepwarden.process.LaunchSpec}, pumps its output in batches to a
 * {@link dev.stepwarden.process.LineBatchListener} and stops its whole tree ({@link
 * dev.stepwarden.process.StopResult}).
 */
package dev.stepwarden.process;
