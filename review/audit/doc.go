// Package audit runs the same coverage analysis over many past cases and
// collects one table, one figure and one report per case, for the physicist
// who audits a registry of treatment sessions with fixed settings.
//
// The framework is independent of the analysis itself: Run finds the cases
// below the given folders (Discover), spreads them over a pool of workers,
// hands each to an Analyzer, writes every result atomically (temporary file
// and rename) into the output folder and finally rebuilds summary.csv,
// errors.csv and summary.png from the per-case results. Cases whose inputs
// and settings are unchanged since an earlier run are skipped on resume, so
// an interrupted audit continues where it stopped. Shard splits a large case
// list deterministically over several machines.
//
// Output folder layout:
//
//	OUT_DIR/settings.json           the analysis settings of the audit
//	OUT_DIR/cases/ID/case.json      one record per case (see Record)
//	OUT_DIR/cases/ID/report.png ... files the Analyzer produced (Artifact)
//	OUT_DIR/summary.csv             one row per case (see Header)
//	OUT_DIR/errors.csv              cases that could not be analysed, with reasons
//	OUT_DIR/summary.png             coverage distribution; outside-margin volume against coverage
//
// With a shard the three summary files are named summary-I-of-N.csv,
// errors-I-of-N.csv and summary-I-of-N.png so that shards may share one
// output folder. The shards of one audit share settings.json: the first
// shard writes it, and a shard whose settings differ from those it holds
// is refused before it analyses any case (SettingsConflictError). Each
// shard also keeps its state in shard-I-of-N.json (ShardState: running,
// interrupted, or finished with its rows); Merge joins the finished shards
// into summary.csv, errors.csv and summary.png as a whole run writes them,
// and refuses a shard that is missing, unfinished or made otherwise.
//
// The package never imports a GUI toolkit; a GUI shows the same Rows that
// Run returns and follows its Progress callback.
package audit
