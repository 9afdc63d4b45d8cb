package capture

// Test helpers shared with the external test package capture_test (which
// may import capture/synth; this package's own tests may not).
var (
	NeedFFmpeg    = needFFmpeg
	FFprobeCount  = ffprobeCount
	FFprobeValue  = ffprobeValue
	FFmpegFrames  = ffmpegFrames
	MatMD5        = matMD5
	ParseRatioFor = parseRatio
)
