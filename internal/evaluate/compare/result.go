// Package compare measures which encoding of a categorical column serves a
// target best, on held-out folds, with every encoding fitted inside the
// training folds only (nested cross-validation), and renders the result as
// text, JSON and a self-contained HTML report.
package compare

// Result is the outcome of one comparison run.
type Result struct {
	Tool string `json:"tool,omitempty"` // the tool and its version, set by the command
	// CommandLine is the command that ran, quoted for a shell: the report's
	// header shows it; the JSON does not, as it must not change with the
	// output paths.
	CommandLine  string         `json:"-"`
	File         string         `json:"file"`
	Target       string         `json:"target"`
	Task         string         `json:"task"`          // binary, multiclass, regression
	Metric       string         `json:"metric"`        // the primary metric candidates are ranked by
	HigherBetter bool           `json:"higher_better"` // for the primary metric
	Folds        int            `json:"folds"`
	InnerFolds   int            `json:"inner_folds"`
	FoldBy       string         `json:"fold_by"` // the fold rule of the outer and inner folds: rows, stratified, group=COL
	Seed         uint64         `json:"seed"`
	Rows         int64          `json:"rows"`              // rows whose statistics were gathered
	ModelRows    int64          `json:"model_rows"`        // rows the models were fitted and scored on (--sample)
	DroppedRows  int64          `json:"dropped_rows"`      // rows whose target was empty: left out of statistics and models
	Classes      []string       `json:"classes,omitempty"` // classification: labels in sorted order; binary: the last is positive
	Lambda       float64        `json:"lambda"`            // L2 weight of the models
	With         []string       `json:"with"`              // numeric columns added to every model
	Columns      []ColumnResult `json:"columns"`
	// Joint is the model over every column's winner at once (--joint).
	Joint *JointResult `json:"joint,omitempty"`
	// EncodeCommand is the manyfold encode command that carries out the
	// verdict: each column with a winner encoded by it ("" for none). It
	// is the JSON's last field, as the command ends the text and the
	// report.
	EncodeCommand string `json:"encode_command"`
}

// ColumnResult holds the candidates of one categorical column, best first.
type ColumnResult struct {
	Column     string            `json:"column"`
	Levels     int               `json:"levels"`
	Candidates []CandidateResult `json:"candidates"`
	Reading    string            `json:"reading"` // one line: what the result means
	// Winner is the candidate that beats the prior and the runner-up by
	// the verdict's test, null when none does ("no clear winner").
	Winner  *string `json:"winner"`
	Verdict Verdict `json:"verdict"`
	// RankFreq is the rank-frequency curve of the column's levels: the row
	// count of the level at each rank (1-based), thinned to a few hundred
	// points spread evenly on a log scale of the rank.
	RankFreq []RankPoint `json:"rank_frequency"`
	// Shrinkage shows, for a sample of levels, the raw mean target against
	// the smoothed value of target:eb fitted on all rows (binary and
	// regression targets; empty for multi-class).
	Shrinkage []ShrinkPoint `json:"shrinkage"`
}

// RankPoint is one point of a rank-frequency curve.
type RankPoint struct {
	Rank int    `json:"rank"`
	Rows uint64 `json:"rows"`
}

// ShrinkPoint is one level's raw and smoothed target mean.
type ShrinkPoint struct {
	Rows     uint64  `json:"rows"`
	Raw      float64 `json:"raw"`
	Smoothed float64 `json:"smoothed"`
}

// CandidateResult is one encoder with its parameters, scored on every
// outer fold.
type CandidateResult struct {
	Name     string    `json:"name"`     // e.g. target:eb, topk:100, hash:1024, prior, target:insample
	Baseline bool      `json:"baseline"` // the prior alone, or the leaky in-sample target mean
	Winner   bool      `json:"winner"`   // the clear winner of the column (see Verdict)
	Tie      bool      `json:"tie"`      // the same score on every fold as the best candidate
	Primary  Stat      `json:"primary"`  // the primary metric over the outer folds
	PerFold  []float64 `json:"per_fold"` // the primary metric on each outer fold
	Metrics  []Metric  `json:"metrics"`  // every metric of the task
	// TrainPrimary is the primary metric on the training rows themselves,
	// which shows how far the in-sample baseline flatters itself.
	TrainPrimary  Stat    `json:"train_primary"`
	FitSeconds    float64 `json:"fit_seconds,omitempty"` // fitting and encoding, summed over folds (--timings only)
	OutputColumns int     `json:"output_columns"`        // columns the encoder adds (indicators for top-k and hash)
	UnseenShare   float64 `json:"unseen_share"`          // held-out rows whose level was not seen in training
}

// Metric is a named metric over the outer folds.
type Metric struct {
	Name string `json:"name"`
	Stat
}

// Stat is a mean and (sample) standard deviation over the outer folds.
type Stat struct {
	Mean float64 `json:"mean"`
	Std  float64 `json:"std"`
}
