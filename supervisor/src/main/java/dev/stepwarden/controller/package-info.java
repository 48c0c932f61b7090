/**
 * The controller's decisions, apart from the process they steer: which of a few short branches
 * at different rates to keep (successive halving with a noise-aware comparison), whether an
 * early phase left the network dead, and the rate of an anneal when a planned budget runs out.
 * Pure functions of the training and validation values they are given; the supervisor launches
 * the branches and publishes the rates. Public face: {@link dev.stepwarden.controller.BranchChoice},
 * {@link dev.stepwarden.controller.EarlyPhase}, {@link dev.stepwarden.controller.Anneal}.
 */
package dev.stepwarden.controller;
