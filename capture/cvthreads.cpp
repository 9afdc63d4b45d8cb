// cvthreads.cpp: OpenCV's thread-pool setting, which gocv v0.31 does not wrap.
#include <opencv2/core.hpp>
#include "cvthreads.h"

void failframe_set_num_threads(int n) { cv::setNumThreads(n); }
int failframe_get_num_threads(void) { return cv::getNumThreads(); }
