// Package qarun is a phantom QA session from fit output to its files, and
// the demo chain built on it. Assess reads the T1 and T2 maps of fit output
// folders or map files (with the status and M0 maps beside them and their
// provenance), completes the session (scanner, date, time, field) from the
// provenance where the caller left it open, and judges the vials
// (roi/phantom). Session.Write puts qa.json, qa.csv and report.html into a
// folder. Demo runs the built-in scenario: simulated monthly sessions
// fitted by the pipeline, assessed, recorded in a history database and
// charted.
//
// The package prints nothing; errors name the file and the problem on one
// line. The command line (cmd/tauvox) keeps the flags, messages and exit
// codes.
package qarun
