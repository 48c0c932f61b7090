/**
 * The audit log: {@link dev.stepwarden.audit.AuditLog} appends one JSON record per line, forced
 * to disk before the action it announces; {@link dev.stepwarden.audit.AuditRecord} is one record
 * class per record type; {@link dev.stepwarden.audit.AuditReader} reads a log back (a torn last
 * line reported, never fatal).
 */
package dev.stepwarden.audit;
