// Package report writes the phantom QA report, report.html: one
// self-contained page (images as data: URIs, no external resource, no
// JavaScript) that a QA physicist can open in any browser, print and file.
//
// The page shows the session (phantom, scanner, date and time, field,
// temperature) and the overall verdict; per quantity the map slice the
// vials were measured on with every vial outlined and labelled in the
// colour of its verdict, the colour bar with units, a measured-against-
// reference plot on log–log axes with the identity line and the
// tolerance band, and a bar chart of the deviations; the table of results;
// the localisation found in each series; the series and their provenance;
// and the caution that tauvox is not a medical device.
//
// Every text taken from files (scanner, phantom and vial names, paths,
// methods) goes through html/template and is escaped; nothing is built by
// string concatenation. The file is written to a temporary name in the
// target folder and renamed when complete.
//
// WriteHistory writes the stability pages of `tauvox history chart`: one
// SVG control chart per scanner × vial × quantity, index.html (series
// worst first, charts inline) and drift.csv.
package report
