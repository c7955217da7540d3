// Package qa defines qa.json, the record of one phantom session that
// tauvox phantom writes and tauvox history reads: the session identity,
// the series measured, the localisation found, and per vial and quantity
// the statistics, the reference at the session's temperature, the
// deviation and the verdict. It holds types and their JSON form only, so
// the history depends on no solver or image code.
package qa
