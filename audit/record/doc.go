// Package record holds the JSON shapes in which the audit pipeline keeps
// what it measured about a series, inside the store's opaque
// store.AuditRecord.Measures: one definition for the writer
// (audit.Pipeline) and every reader (metrics, reports, web pages), so
// that a field renamed in one place cannot silently read as null in
// another. It imports only the standard library.
package record
