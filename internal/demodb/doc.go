// Package demodb loads the generated demo data set (package demodata) into a DuckDB
// database, as the tables invoices, new_invoices, new_invoice_outcomes and
// feature_dictionary.
package demodb
