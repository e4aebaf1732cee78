// Package plots draws copse's pictures: feature importance, the error or loss curve by
// trees, ROC curves, calibration, partial dependence and drift.
//
// It is pure drawing. Each kind has one function that takes plain Go values (rows as
// the copse_* relations return them, converted by the caller) and returns a [Picture],
// which [Picture.Save] writes as PNG or SVG by the file's extension. It runs no query
// and knows nothing of SQL, models or the engine.
//
// Every picture has the same size ([Width] × [Height], PNG at [DPI] dots per inch), the
// same fonts and margins, a title and labelled axes, so that a set of them reads alike.
// Colours follow one small palette; drift statuses use green, amber and red.
package plots
