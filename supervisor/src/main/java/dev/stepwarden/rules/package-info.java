/**
 * The guard-file language: the model of a guard file ({@link dev.stepwarden.rules.GuardFile}),
 * its strict loader ({@link dev.stepwarden.rules.GuardFiles}), the catalogue of accepted keys,
 * the JSON Schema ({@link dev.stepwarden.rules.Schema}), the plain-words explanation of
 * {@code stepwarden check} ({@link dev.stepwarden.rules.Explain}) and the configuration error
 * ({@link dev.stepwarden.rules.ConfigException}). It decides nothing about a run.
 */
package dev.stepwarden.rules;
