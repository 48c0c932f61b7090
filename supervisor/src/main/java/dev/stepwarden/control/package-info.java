/**
 * How a new learning rate reaches a trainer that listens: {@link
 * dev.stepwarden.control.ControlFile} writes the control file atomically (a new revision before
 * every launch and for each live change); the trainer-side helpers ship as resources next to it.
 */
package dev.stepwarden.control;
