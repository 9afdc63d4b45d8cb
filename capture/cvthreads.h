// cvthreads.h: OpenCV's thread-pool setting, which gocv v0.31 does not wrap.
#ifdef __cplusplus
extern "C" {
#endif
void failframe_set_num_threads(int n);
int failframe_get_num_threads(void);
#ifdef __cplusplus
}
#endif
