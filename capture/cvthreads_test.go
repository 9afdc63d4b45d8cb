package capture

import "testing"

// SetImageThreads reaches OpenCV's own setting: what is set is what OpenCV
// reports back (cv::getNumThreads).
func TestSetImageThreads(t *testing.T) {
	before := ImageThreads()
	defer SetImageThreads(before)
	for _, n := range []int{1, 2} {
		SetImageThreads(n)
		if got := ImageThreads(); got != n {
			t.Errorf("SetImageThreads(%d): OpenCV reports %d threads", n, got)
		}
	}
}
