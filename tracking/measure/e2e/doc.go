// Package e2e holds end-to-end checks of tracking/measure against the
// synthesizer's exact truth (capture/synth). It lives apart from measure so
// that measure's own tests never link OpenCV.
package e2e
