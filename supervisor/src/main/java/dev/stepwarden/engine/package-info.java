/**
 * The policy: {@link dev.stepwarden.engine.GuardEngine} feeds each sample to the guards of a
 * guard file and turns the first that fires into a {@link dev.stepwarden.engine.Decision}; live
 * runs and {@code replay} share it.
 */
package dev.stepwarden.engine;
