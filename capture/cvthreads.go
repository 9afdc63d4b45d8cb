package capture

/*
#cgo !windows pkg-config: opencv4
#cgo CXXFLAGS: --std=c++11
#include "cvthreads.h"
*/
import "C"

// SetImageThreads sets how many threads OpenCV's image functions (resize,
// colour conversion, encoding) may share out their work to; 1 runs them on
// the calling thread. It does not touch FFmpeg's decoding threads.
//
// failframe sets 1 for the whole process: its frames are small enough that
// spreading one resize over the pool gains nothing, while the pool's idle
// worker keeps polling for work between calls (31 000 sched_yield calls over
// a 2 100-frame clip, 700 with one thread, measured with strace), CPU time
// the decoder's threads could use.
func SetImageThreads(n int) { C.failframe_set_num_threads(C.int(n)) }

// ImageThreads returns the number of threads OpenCV's image functions use.
func ImageThreads() int { return int(C.failframe_get_num_threads()) }
