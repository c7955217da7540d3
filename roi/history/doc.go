// Package history keeps the record of phantom QA sessions in one SQLite
// file and computes each vial's stability statistics: baseline, control
// limits, the Western Electric run rules, an EWMA chart and the linear
// drift per year with its confidence interval.
//
// The store uses modernc.org/sqlite, a pure-Go SQLite (no cgo, so the
// binary stays static). The schema is versioned (PRAGMA user_version) and
// migrated forward on open; foreign keys are on, the journal is in WAL
// mode, every add is one IMMEDIATE transaction, and a busy timeout lets two
// writers queue instead of failing.
//
// Statistics are computed on each vial's deviation from its
// temperature-corrected reference (percent), because raw T1 and T2 of
// phantom materials move by percent per °C; where a quantity has no
// reference, the value relative to its baseline mean is used
// (design.md).
package history
