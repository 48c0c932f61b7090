/**
 * The bundled demo trainer ({@link dev.stepwarden.demo.DemoTrainer}): a small network on
 * invented data (our own scenario) that follows the control-file protocol like any user's trainer,
 * for {@code stepwarden demo} and the tests.
 */
package dev.stepwarden.demo;
