// Package report turns an analysis into what a builder reads and keeps: the
// load log and its alignment to video time, plots, annotated evidence frames,
// report.json and report.html. Sub-packages hold the load-log reader
// (loadlog), the clock alignment (align), the charts (plots), the annotated
// evidence frames (evidence), the analyze pipeline (analysis), the build
// record store (records) and the review page (review).
package report

// ResultVersion is the version of report.json's layout. Fields are only ever
// added within a version; a change of meaning bumps it.
const ResultVersion = 1

// ResultFile is the name of the analysis summary in a report folder.
const ResultFile = "report.json"

// Result is report.json: the summary of one analysis.
type Result struct {
	// Version is ResultVersion at the time of writing.
	Version int `json:"version"`
	// Tool names the program and its version.
	Tool string `json:"tool"`
	// CreatedAt is when the report was written, RFC 3339.
	CreatedAt string `json:"created_at"`
	// Clip describes the clip analysed.
	Clip ClipFacts `json:"clip"`
	// CaptureFPS is the true capture rate used for all times.
	CaptureFPS float64 `json:"capture_fps"`
	// CaptureFPSFrom says where the capture rate came from: flag, marks or container.
	CaptureFPSFrom string `json:"capture_fps_from"`
	// MMPerPixel is the scale at the tower (0 when the marks give none).
	MMPerPixel float64 `json:"mm_per_px"`
	// Levels are per-level maxima.
	Levels []LevelSummary `json:"levels"`
	// Events are the failure events, ordered by frame.
	Events []Event `json:"events"`
	// FirstMember is the id of the first member to go ("" when undetermined).
	FirstMember string `json:"first_member"`
	// FailureMode is one label from the documented set (see the README).
	FailureMode string `json:"failure_mode"`
	// Account is the plain-language failure account.
	Account string `json:"account"`
	// Advice is what to change in the next build, one sentence an item.
	Advice []string `json:"advice"`
	// Alignment says how the load log was lined up with video time; nil without a log.
	Alignment *Alignment `json:"alignment,omitempty"`
	// PeakLoadG is the largest load held in grams; nil without a log.
	PeakLoadG *float64 `json:"peak_load_g,omitempty"`
	// MassG is the structure's own mass in grams; nil when not given.
	MassG *float64 `json:"mass_g,omitempty"`
	// Efficiency is peak load over structure mass (both in grams); nil when either is missing.
	Efficiency *float64 `json:"efficiency,omitempty"`
	// Members are per-member maxima before collapse.
	Members []MemberSummary `json:"members"`
	// LoadLog describes the load log read; nil without a log.
	LoadLog *LoadLogFacts `json:"load_log,omitempty"`
	// Figures are the plots and evidence frames, in the order the page shows them.
	Figures []Figure `json:"figures"`
	// Warnings are things the reader should know (rates guessed, points lost, unobservable twist).
	Warnings []string `json:"warnings"`
	// Files lists the report's files relative to the report folder.
	Files []string `json:"files"`
}

// ClipFacts describes the clip analysed.
type ClipFacts struct {
	// Path is the clip's path as given.
	Path string `json:"path"`
	// Width and Height are the frame size in pixels.
	Width  int `json:"width"`
	Height int `json:"height"`
	// Codec is the codec's four-character code.
	Codec string `json:"codec"`
	// ContainerFPS is the playback rate stored in the file.
	ContainerFPS float64 `json:"container_fps"`
	// FrameCount is the number of frames in the clip.
	FrameCount int `json:"frame_count"`
	// FirstFrame and LastFrame are the analysed range (after trimming).
	FirstFrame int `json:"first_frame"`
	LastFrame  int `json:"last_frame"`
}

// LevelSummary is one braced level's largest motion.
type LevelSummary struct {
	// Level is the level number, 0 = base.
	Level int `json:"level"`
	// TwistObservable is false when the level's points cannot show twist from this camera.
	TwistObservable bool `json:"twist_observable"`
	// MaxTwistDeg is the largest absolute twist before collapse, degrees (counter-clockwise from above positive).
	MaxTwistDeg float64 `json:"max_twist_deg"`
	// MaxSwayMM is the largest absolute sway before collapse, mm.
	MaxSwayMM float64 `json:"max_sway_mm"`
	// Note explains a missing number.
	Note string `json:"note,omitempty"`
}

// Event is one step in the failure.
type Event struct {
	// Kind is one of: onset, break, twist_onset, collapse, lost.
	Kind string `json:"kind"`
	// Member is the member's id, "" for whole-tower events.
	Member string `json:"member,omitempty"`
	// Frame is the frame number.
	Frame int `json:"frame"`
	// TimeS is the real time in seconds (frame / capture rate).
	TimeS float64 `json:"time_s"`
	// LoadG is the aligned load at the event in grams; nil without a log.
	LoadG *float64 `json:"load_g,omitempty"`
	// Detail says what was seen.
	Detail string `json:"detail"`
}

// Alignment says how the logger clock was lined up with video time:
// video_time = log_time + OffsetS.
type Alignment struct {
	// Method is auto, manual or sync.
	Method string `json:"method"`
	// OffsetS is added to log time to get video time, seconds.
	OffsetS float64 `json:"offset_s"`
	// UncertaintyS is the offset's uncertainty, at least one log sample period, seconds.
	UncertaintyS float64 `json:"uncertainty_s"`
	// Detail says how it was found.
	Detail string `json:"detail"`
}

// MemberSummary is one member's largest deformation before collapse.
type MemberSummary struct {
	// ID is the member's id from the marks file.
	ID string `json:"id"`
	// Kind is leg, brace or block.
	Kind string `json:"kind"`
	// LengthMM is the member's length in the reference frame, mm (0 without a scale).
	LengthMM float64 `json:"length_mm"`
	// MaxBowMM is the largest absolute bow (sideways deflection of the middle from the chord), mm.
	MaxBowMM float64 `json:"max_bow_mm"`
	// MaxBowPct is MaxBowMM as a percentage of the length.
	MaxBowPct float64 `json:"max_bow_pct"`
	// MaxStrainPct is the largest absolute chord strain, percent (shortening positive or negative as measured).
	MaxStrainPct float64 `json:"max_strain_pct"`
	// OnsetFrame is the frame of the member's onset event, -1 when none.
	OnsetFrame int `json:"onset_frame"`
	// BreakFrame is the frame of the member's break event, -1 when none.
	BreakFrame int `json:"break_frame"`
}

// LoadLogFacts describes the load log read.
type LoadLogFacts struct {
	// Path is the log's path as given.
	Path string `json:"path"`
	// Detected says which columns and units were used and why.
	Detected string `json:"detected"`
	// Samples is the number of samples used.
	Samples int `json:"samples"`
	// PeriodS is the median sampling period, seconds.
	PeriodS float64 `json:"period_s"`
	// SkippedLines are the line numbers of bad lines skipped.
	SkippedLines []int `json:"skipped_lines"`
}

// Figure is one image in the report.
type Figure struct {
	// File is the PNG's path relative to the report folder.
	File string `json:"file"`
	// SVG is the vector copy's path ("" for evidence frames).
	SVG string `json:"svg,omitempty"`
	// Kind is plot or evidence.
	Kind string `json:"kind"`
	// Caption says what the image shows.
	Caption string `json:"caption"`
}
