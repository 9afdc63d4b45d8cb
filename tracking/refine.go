package tracking

import (
	"math"
	"sort"
)

// grayImage is a view of an 8-bit frame, grey or BGR(A), read as grey: the
// pixel (x, y) starts at pix[y*stride+x*ch]. It aliases a gocv.Mat's memory;
// no copy is made. Colour pixels are turned to grey as OpenCV's cvtColor
// does for 8-bit BGR: (3735 B + 19235 G + 9798 R + 16384) >> 15.
type grayImage struct {
	pix           []uint8
	width, height int
	stride        int // bytes per row
	ch            int // bytes per pixel: 1, 3 or 4
}

// at returns the grey value of pixel (x, y).
func (g grayImage) at(x, y int) float64 {
	i := y*g.stride + x*g.ch
	if g.ch == 1 {
		return float64(g.pix[i])
	}
	return float64(greyOf(g.pix[i], g.pix[i+1], g.pix[i+2]))
}

// greyOf is OpenCV's fixed-point BGR to grey conversion.
func greyOf(b, g, r uint8) uint8 {
	return uint8((int(b)*3735 + int(g)*19235 + int(r)*9798 + 1<<14) >> 15)
}

// row copies n grey values of row y from column x into dst.
func (g grayImage) row(dst []float64, x, y int) {
	src := g.pix[y*g.stride+x*g.ch:]
	switch g.ch {
	case 1:
		src = src[:len(dst)]
		for i, v := range src {
			dst[i] = float64(v)
		}
	default:
		c := g.ch
		src = src[:len(dst)*c]
		for i := range dst {
			p := src[i*c : i*c+3 : i*c+3]
			dst[i] = float64(greyOf(p[0], p[1], p[2]))
		}
	}
}

// template is a point's reference patch: the reference frame's pixels on an
// integer grid of (2r+1)^2 around anchor, made zero-mean, with the gradients
// and the Gauss-Newton matrix of the inverse-compositional refinement
// (Baker & Matthews, "Lucas-Kanade 20 Years On", IJCV 56:221-255, 2004),
// precomputed once. Pixels are weighted by a Gaussian centred on the point,
// so the marker counts more than the background at the window's edge, which
// may not move with it.
type template struct {
	// raw holds the reference pixels, rgx and rgy their gradients and gauss
	// the Gaussian weights; static marks pixels found to belong to a still
	// background rather than the point (weighted out).
	raw, rgx, rgy, gauss []float64
	static               []bool
	// ev is the evidence, per pixel, that it stays still while the point
	// moves; nil until the point first moves far enough to tell.
	ev     []float32
	r      int
	n      int       // (2r+1)^2
	wt     []float64 // pixel weights, summing to 1
	t      []float64 // zero-mean (weighted) reference values
	norm   float64   // sqrt(sum wt t^2)
	gx, gy []float64 // weighted gradients of t: wt * dt/dx, wt * dt/dy
	// sums of gx, gy and of their products with t
	sgx, sgy, sgxt, sgyt float64
	// inverse of the 2x2 Gauss-Newton matrix sum(wt grad grad^T)
	hxx, hxy, hyy float64
	// minEig is the smaller eigenvalue of the weighted structure matrix
	// divided by the weighted patch variance: a texture figure in 1/px^2
	// that does not depend on contrast.
	minEig float64
	// isotropy is the smaller eigenvalue of the weighted structure matrix
	// over the larger: near 1 for a dot, near 0 for a patch that is one
	// straight edge (along which a match can slide).
	isotropy float64
	// edgeDir is the direction, radians in the image (x right, y down),
	// along which the patch's dominant edge runs.
	edgeDir float64
	// anchorX, anchorY is the integer grid centre in the reference frame.
	anchorX, anchorY int
	// block is the grey block the template was built from (side 2r+5) and
	// sigma its Gaussian weighting radius.
	block []float64
	sigma float64
	// core lists the pixels within the inner half of the window, where the
	// marker itself is; coreT are their zero-mean values and coreNorm their
	// norm. The core's correlation tells a match of the marker from a match
	// of the background around it.
	core     []int
	coreT    []float64
	coreNorm float64
}

// newTemplate cuts a template of half-size r around (ax, ay) out of img,
// weighted by a Gaussian of the given sigma (0 = uniform). The patch and a
// 2-pixel border for the gradients must lie inside img.
func newTemplate(img grayImage, ax, ay, r int, sigma float64) *template {
	bs := 2*r + 5
	blk := make([]float64, bs*bs)
	for j := 0; j < bs; j++ {
		img.row(blk[j*bs:(j+1)*bs], ax-r-2, ay-r-2+j)
	}
	return templateFromBlock(blk, ax, ay, r, sigma)
}

// templateFromBlock builds a template from the grey block of side 2r+5
// centred on the anchor (the patch and a 2-pixel border for the gradients).
func templateFromBlock(blk []float64, ax, ay, r int, sigma float64) *template {
	side := 2*r + 1
	bs := side + 4
	n := side * side
	tp := &template{r: r, n: n, anchorX: ax, anchorY: ay, sigma: sigma, block: blk,
		raw: make([]float64, n), rgx: make([]float64, n), rgy: make([]float64, n), gauss: make([]float64, n),
		t: make([]float64, n), wt: make([]float64, n), gx: make([]float64, n), gy: make([]float64, n),
		static: make([]bool, n)}
	at := func(u, v int) float64 { return blk[(v+r+2)*bs+u+r+2] }
	k := 0
	for v := -r; v <= r; v++ {
		for u := -r; u <= r; u++ {
			w := 1.0
			if sigma > 0 {
				w = math.Exp(-float64(u*u+v*v) / (2 * sigma * sigma))
			}
			tp.gauss[k] = w
			tp.raw[k] = at(u, v)
			// Fourth-order central differences (common practice).
			tp.rgx[k] = (at(u-2, v) - 8*at(u-1, v) + 8*at(u+1, v) - at(u+2, v)) / 12
			tp.rgy[k] = (at(u, v-2) - 8*at(u, v-1) + 8*at(u, v+1) - at(u, v+2)) / 12
			k++
		}
	}
	tp.weigh()
	c := max(3, r/2)
	var csum float64
	for v := -c; v <= c; v++ {
		for u := -c; u <= c; u++ {
			k := (v+r)*side + u + r
			tp.core = append(tp.core, k)
			tp.coreT = append(tp.coreT, tp.raw[k])
			csum += tp.raw[k]
		}
	}
	cm := csum / float64(len(tp.core))
	var css float64
	for i := range tp.coreT {
		tp.coreT[i] -= cm
		css += tp.coreT[i] * tp.coreT[i]
	}
	tp.coreNorm = math.Sqrt(css)
	return tp
}

// weigh computes the weighted template, its gradients and Gauss-Newton
// matrix from the raw patch, the Gaussian and the static-pixel mask.
func (tp *template) weigh() {
	var sum, wsum float64
	for k, g := range tp.gauss {
		w := g
		if tp.static[k] {
			w = 0
		}
		tp.wt[k] = w
		wsum += w
		sum += w * tp.raw[k]
	}
	mean := sum / wsum
	var ss, sxx, sxy, syy float64
	for i := range tp.t {
		tp.wt[i] /= wsum
		w := tp.wt[i]
		tp.t[i] = tp.raw[i] - mean
		ss += w * tp.t[i] * tp.t[i]
		sxx += w * tp.rgx[i] * tp.rgx[i]
		sxy += w * tp.rgx[i] * tp.rgy[i]
		syy += w * tp.rgy[i] * tp.rgy[i]
		tp.gx[i] = w * tp.rgx[i]
		tp.gy[i] = w * tp.rgy[i]
	}
	tp.norm = math.Sqrt(ss)
	tp.sgx, tp.sgy, tp.sgxt, tp.sgyt = 0, 0, 0, 0
	for i := range tp.t {
		tp.sgx += tp.gx[i]
		tp.sgy += tp.gy[i]
		tp.sgxt += tp.gx[i] * tp.t[i]
		tp.sgyt += tp.gy[i] * tp.t[i]
	}
	tp.hxx, tp.hxy, tp.hyy = 0, 0, 0
	det := sxx*syy - sxy*sxy
	if det > 0 {
		tp.hxx, tp.hxy, tp.hyy = syy/det, -sxy/det, sxx/det
	}
	tr := sxx + syy
	lmin := tr/2 - math.Sqrt(math.Max(0, tr*tr/4-det))
	tp.minEig = 0
	if ss > 0 {
		tp.minEig = lmin / ss
	}
	tp.isotropy = 0
	if lmax := tr - lmin; lmax > 0 {
		tp.isotropy = lmin / lmax
	}
	tp.edgeDir = 0.5*math.Atan2(2*sxy, sxx-syy) + math.Pi/2
}

// refiner holds scratch buffers for refinement so the per-frame loop does not
// allocate.
type refiner struct {
	tmp []float64 // horizontal pass, (2r+1+taps-1) rows x (2r+1)
	w   []float64 // resampled patch
	// gen numbers the frames (0 = unknown: no caching); blkKey says what blk
	// holds.
	gen    uint64
	blkKey blockKey
	// robust refinement's weights, residuals and sorted absolute residuals
	rw, res, abs []float64
	blk          []float64 // frame block as floats
	// next is learnStatic's new still-background mask
	next []bool
}

func (rf *refiner) ensure(r int) {
	side := 2*r + 1
	if len(rf.w) < side*side {
		rf.w = make([]float64, side*side)
		rf.tmp = make([]float64, (side+taps-1)*side)
		rf.blk = make([]float64, (side+taps-1)*(side+taps-1))
	}
}

// keys6 is Keys' six-point cubic convolution kernel, third-order accurate
// (Keys, "Cubic convolution interpolation for digital image processing",
// IEEE Trans. ASSP 29:1153-1160, 1981, eq. 28). Its flatter frequency
// response than the four-point kernel halves the periodic sub-pixel bias.
func keys6(s float64) float64 {
	s = math.Abs(s)
	switch {
	case s < 1:
		return (4.0/3*s-7.0/3)*s*s + 1
	case s < 2:
		return ((-7.0/12*s+3)*s-59.0/12)*s + 5.0/2
	case s < 3:
		return ((1.0/12*s-2.0/3)*s+7.0/4)*s - 3.0/2
	}
	return 0
}

// taps is the number of interpolation taps; the first is at offset -2.
const taps = 6

// kernelWeights fills w with the weights of the taps at -2..3 around a
// fractional offset f in [0, 1).
func kernelWeights(f float64, w *[taps]float64) {
	for k := range w {
		w[k] = keys6(f - float64(k-2))
	}
}

// sample resamples img on the template grid centred at (cx, cy) into rf.w and
// returns the patch mean. ok is false when the patch leaves the image.
func (rf *refiner) sample(img grayImage, r int, cx, cy float64) (mean float64, ok bool) {
	side := 2*r + 1
	fx, fy := math.Floor(cx), math.Floor(cy)
	ix, iy := int(fx), int(fy)
	if ix-r-2 < 0 || iy-r-2 < 0 || ix+r+3 >= img.width || iy+r+3 >= img.height {
		return 0, false
	}
	var ax, ay [taps]float64
	kernelWeights(cx-fx, &ax)
	kernelWeights(cy-fy, &ay)
	// Convert the block once (kept while the iterations stay on the same
	// whole pixel of the same frame), then filter rows, then columns.
	rows := side + taps - 1
	blk := rf.blk[:rows*rows]
	if key := (blockKey{gen: rf.gen, x: ix, y: iy, r: r}); key != rf.blkKey || rf.gen == 0 {
		for j := 0; j < rows; j++ {
			img.row(blk[j*rows:(j+1)*rows], ix-r-2, iy-r-2+j)
		}
		rf.blkKey = key
	}
	for j := 0; j < rows; j++ {
		b := blk[j*rows : (j+1)*rows]
		out := rf.tmp[j*side : (j+1)*side]
		b = b[:len(out)+taps-1]
		for i := range out {
			out[i] = ax[0]*b[i] + ax[1]*b[i+1] + ax[2]*b[i+2] + ax[3]*b[i+3] + ax[4]*b[i+4] + ax[5]*b[i+5]
		}
	}
	var sum float64
	for j := 0; j < side; j++ {
		r0 := rf.tmp[j*side : (j+1)*side]
		r1 := rf.tmp[(j+1)*side : (j+2)*side]
		r2 := rf.tmp[(j+2)*side : (j+3)*side]
		r3 := rf.tmp[(j+3)*side : (j+4)*side]
		r4 := rf.tmp[(j+4)*side : (j+5)*side]
		r5 := rf.tmp[(j+5)*side : (j+6)*side]
		out := rf.w[j*side : (j+1)*side]
		r0, r1, r2, r3, r4, r5 = r0[:len(out)], r1[:len(out)], r2[:len(out)], r3[:len(out)], r4[:len(out)], r5[:len(out)]
		for i := range out {
			v := ay[0]*r0[i] + ay[1]*r1[i] + ay[2]*r2[i] + ay[3]*r3[i] + ay[4]*r4[i] + ay[5]*r5[i]
			out[i] = v
			sum += v
		}
	}
	return sum / float64(side*side), true
}

// refineResult is the outcome of one refinement.
type refineResult struct {
	x, y      float64 // template centre in the current frame
	zncc      float64 // zero-mean normalised cross-correlation at the end
	core      float64 // the same over the window's inner half
	converged bool
	ok        bool // false when the patch left the frame or had no contrast
}

// q is the match quality: the lower of the whole window's and the core's
// correlation, so that neither background nor a marker alone can pass.
func (r refineResult) q() float64 { return math.Min(r.zncc, r.core) }

// refine aligns template tp to img by inverse-compositional Gauss-Newton on
// the zero-mean normalised sum of squared differences, starting with the
// template centre at (x, y). Gain and offset changes (flicker) cancel out of
// the criterion. It stops when the step is below eps pixels or after maxIter
// iterations, or when the centre moves more than maxMove from the start.
func (rf *refiner) refine(tp *template, img grayImage, x, y float64, maxIter int, eps, maxMove float64) refineResult {
	rf.ensure(tp.r)
	x0, y0 := x, y
	res := refineResult{x: x, y: y}
	if tp.norm == 0 || (tp.hxx == 0 && tp.hyy == 0) {
		return res
	}
	n := tp.n
	for it := 0; it < maxIter; it++ {
		if _, ok := rf.sample(img, tp.r, x, y); !ok {
			return res
		}
		// One pass gathers every sum; since sum(wt t) = 0 and the gradients'
		// sums are precomputed, the residual's projections follow:
		// b = scale (sum(g v) - mean sum(g)) - sum(g t).
		w := rf.w[:n]
		wt, tt := tp.wt[:n], tp.t[:n]
		gx, gy := tp.gx[:n], tp.gy[:n]
		var sv, svv, svt, sgx, sgy float64
		for i, v := range w {
			k := wt[i] * v
			sv += k
			svv += k * v
			svt += k * tt[i]
			sgx += gx[i] * v
			sgy += gy[i] * v
		}
		mean := sv
		ss := svv - mean*mean
		if !(ss > 1e-9*svv) {
			return res
		}
		wn := math.Sqrt(ss)
		scale := tp.norm / wn
		cross := svt
		bx := scale*(sgx-mean*tp.sgx) - tp.sgxt
		by := scale*(sgy-mean*tp.sgy) - tp.sgyt
		dx := tp.hxx*bx + tp.hxy*by
		dy := tp.hxy*bx + tp.hyy*by
		res.zncc = cross / (wn * tp.norm)
		res.x, res.y, res.ok = x, y, true
		x -= dx
		y -= dy
		if math.Hypot(x-x0, y-y0) > maxMove {
			res.ok = false
			return res
		}
		if dx*dx+dy*dy < eps*eps {
			res.converged = true
			break
		}
	}
	// The score is the one at the last iterate, which is within one step
	// (below eps when converged) of the final position.
	res.x, res.y = x, y
	res.core = rf.coreScore(tp)
	return res
}

// coreScore is the correlation of the core of the last resampled patch with
// the template's core.
func (rf *refiner) coreScore(tp *template) float64 {
	var sum float64
	for _, k := range tp.core {
		sum += rf.w[k]
	}
	mean := sum / float64(len(tp.core))
	var ss, cross float64
	for i, k := range tp.core {
		d := rf.w[k] - mean
		ss += d * d
		cross += d * tp.coreT[i]
	}
	if ss == 0 || tp.coreNorm == 0 {
		return 0
	}
	return cross / (math.Sqrt(ss) * tp.coreNorm)
}

// learnStatic gathers evidence, pixel by pixel, of background that stays
// still while the point moves: with the point's centre now at (x, y), a
// pixel whose reference value is matched by the frame at its old place (the
// anchor grid) and not at the moved place is still background. Once a
// pixel's evidence is strong it is weighted out of the template, so that a
// textured wall or table behind a thin member does not hold the point back.
//
// The evidence is a sequential log-likelihood ratio (Wald, "Sequential
// tests of statistical hypotheses", Ann. Math. Statist. 16:117-186, 1945)
// of the two explanations under Gaussian residuals: each look adds
// (em^2 - es^2) / (2 var), where es and em are the pixel's residuals if it
// stayed and if it moved. The increment's mean and spread both shrink with
// the motion, so small motions add little but never nothing, and a faint
// background under sensor noise is still learned over many frames. A pixel
// is taken as still background when its own evidence favours that and the
// evidence summed over its 3x3 neighbourhood (still background comes in
// regions, not single pixels) passes a likelihood ratio of e^staticOn; it
// is taken back below e^staticOff. Nothing is learned until the point has
// moved minLearnMove px. It reports whether the template changed.
func (rf *refiner) learnStatic(tp *template, img grayImage, x, y float64) bool {
	ax, ay, r := tp.anchorX, tp.anchorY, tp.r
	if math.Hypot(x-float64(ax), y-float64(ay)) < minLearnMove {
		return false
	}
	if ax-r < 0 || ay-r < 0 || ax+r >= img.width || ay+r >= img.height {
		return false
	}
	if _, ok := rf.sample(img, r, x, y); !ok {
		return false
	}
	n := tp.n
	side := 2*r + 1
	mov := rf.w[:n]
	st := rf.tmp[:n]
	for j := 0; j < side; j++ {
		img.row(st[j*side:(j+1)*side], ax-r, ay-r+j)
	}
	stats := func(v []float64) (mean, norm float64) {
		var sum, wsum float64
		for k, g := range tp.gauss {
			sum += g * v[k]
			wsum += g
		}
		mean = sum / wsum
		var ss float64
		for k, g := range tp.gauss {
			d := v[k] - mean
			ss += g * d * d
		}
		return mean, math.Sqrt(ss)
	}
	mt, nt := stats(tp.raw)
	mm, nm := stats(mov)
	if nt == 0 || nm == 0 {
		return false
	}
	// Residuals of both explanations, in reference grey levels. Gain and
	// offset are the light's, the same for both: take them from the moved
	// patch, which matches the template.
	var noise, gsum float64
	for k, g := range tp.gauss {
		t := tp.raw[k] - mt
		em := (mov[k]-mm)*nt/nm - t
		es := (st[k]-mm)*nt/nm - t
		mov[k], st[k] = em*em, es*es
		noise += g * math.Min(mov[k], st[k])
		gsum += g
	}
	// The residual variance of the better explanation, pixel by pixel, is
	// the noise (the mean of the smaller of two squares underestimates it
	// by about half for equal spreads: take twice).
	vr := math.Max(2*noise/gsum, 1)
	if tp.ev == nil {
		tp.ev = make([]float32, n)
	}
	for k := range tp.ev {
		inc := (mov[k] - st[k]) / (2 * vr)
		// A single look is capped so that one disturbance (a flash, a
		// passing hand) cannot decide.
		inc = math.Max(-maxLookEvidence, math.Min(maxLookEvidence, inc))
		tp.ev[k] = float32(math.Max(-maxEvidence, math.Min(maxEvidence, float64(tp.ev[k])+inc)))
	}
	changed := false
	if len(rf.next) < n {
		rf.next = make([]bool, n)
	}
	next := rf.next[:n]
	for v := 0; v < side; v++ {
		for u := 0; u < side; u++ {
			k := v*side + u
			next[k] = false
			if tp.ev[k] <= 0 {
				continue
			}
			var sum float64
			for dv := -1; dv <= 1; dv++ {
				for du := -1; du <= 1; du++ {
					uu, vv := u+du, v+dv
					if uu < 0 || vv < 0 || uu >= side || vv >= side {
						continue
					}
					sum += float64(tp.ev[vv*side+uu])
				}
			}
			lim := staticOn
			if tp.static[k] {
				lim = staticOff
			}
			next[k] = sum >= lim
		}
	}
	for k := range next {
		if next[k] != tp.static[k] {
			changed = true
		}
	}
	if !changed {
		return false
	}
	old := append([]bool(nil), tp.static...)
	var kept, total float64
	for k, g := range tp.gauss {
		tp.static[k] = next[k]
		total += g
		if !tp.static[k] {
			kept += g
		}
	}
	minEig := tp.minEig
	tp.weigh()
	// Keep enough of the patch, with texture in both directions.
	if kept < 0.3*total || tp.minEig < 0.5*minEig && tp.minEig < 0.002 {
		copy(tp.static, old)
		tp.weigh()
		return false
	}
	return true
}

// Settings of the still-background learning (see learnStatic).
const (
	// minLearnMove is the least distance in px from the anchor at which
	// the two explanations are compared.
	minLearnMove = 0.3
	// maxLookEvidence caps one look's log-likelihood ratio per pixel, and
	// maxEvidence the running sum, so that a pixel can change sides.
	maxLookEvidence = 2
	maxEvidence     = 12
	// staticOn and staticOff are the 3x3-summed log-likelihood ratios at
	// which a pixel is weighted out, and back in.
	staticOn  = 12.0
	staticOff = 6.0
)

// robustResult is the outcome of a robust refinement.
type robustResult struct {
	x, y      float64
	zncc      float64 // correlation over the pixels kept
	kept      float64 // weight share of the pixels kept, 0..1
	converged bool
	ok        bool
}

// q is the robust match quality: the correlation over the pixels kept times
// their share, so a half-hidden marker scores at most one half.
func (r robustResult) q() float64 { return r.zncc * r.kept }

// refineRobust aligns tp to img like refine, but weights each pixel by
// Tukey's biweight of its residual (scale from the median absolute
// residual; Holland & Welsch, "Robust regression using iteratively
// reweighted least-squares", Commun. Statist. A6:813-827, 1977), so that a
// part of the window hidden by something in front does not pull the point.
// Gain and offset are estimated from the kept pixels only. It is slower
// than refine and runs only when refine does not land cleanly.
func (rf *refiner) refineRobust(tp *template, img grayImage, x, y float64, maxIter int, eps, maxMove float64) robustResult {
	rf.ensure(tp.r)
	n := tp.n
	if len(rf.rw) < n {
		rf.rw = make([]float64, n)
		rf.res = make([]float64, n)
		rf.abs = make([]float64, n)
	}
	om := rf.rw[:n]
	for i := range om {
		om[i] = 1
	}
	x0, y0 := x, y
	out := robustResult{x: x, y: y}
	for it := 0; it < maxIter; it++ {
		if _, ok := rf.sample(img, tp.r, x, y); !ok {
			return out
		}
		w := rf.w[:n]
		// Weighted statistics over the kept pixels.
		var sw, mt, mw float64
		for i, g := range tp.gauss {
			k := g * om[i]
			sw += k
			mt += k * tp.raw[i]
			mw += k * w[i]
		}
		if sw == 0 {
			return out
		}
		mt /= sw
		mw /= sw
		var st, sww, cross float64
		for i, g := range tp.gauss {
			k := g * om[i]
			a, b := tp.raw[i]-mt, w[i]-mw
			st += k * a * a
			sww += k * b * b
			cross += k * a * b
		}
		if st == 0 || sww == 0 {
			return out
		}
		scale := math.Sqrt(st / sww)
		res := rf.res[:n]
		abs := rf.abs[:n]
		for i := range res {
			res[i] = (w[i]-mw)*scale - (tp.raw[i] - mt)
			abs[i] = math.Abs(res[i])
		}
		sort.Float64s(abs)
		sigma := 1.4826 * abs[n/2]
		c := 4.685 * math.Max(sigma, 1)
		var hxx, hxy, hyy, bx, by, kept, total float64
		for i, g := range tp.gauss {
			u := res[i] / c
			om[i] = 0
			if u*u < 1 {
				om[i] = (1 - u*u) * (1 - u*u)
			}
			k := g * om[i]
			gx, gy := tp.rgx[i], tp.rgy[i]
			hxx += k * gx * gx
			hxy += k * gx * gy
			hyy += k * gy * gy
			bx += k * gx * res[i]
			by += k * gy * res[i]
			kept += k
			total += g
		}
		det := hxx*hyy - hxy*hxy
		if det <= 0 {
			return out
		}
		dx := (hyy*bx - hxy*by) / det
		dy := (hxx*by - hxy*bx) / det
		out.x, out.y, out.ok = x, y, true
		out.zncc = cross / math.Sqrt(st*sww)
		out.kept = kept / total
		x -= dx
		y -= dy
		if math.Hypot(x-x0, y-y0) > maxMove {
			out.ok = false
			return out
		}
		if dx*dx+dy*dy < eps*eps {
			out.converged = true
			break
		}
	}
	out.x, out.y = x, y
	return out
}

// blockKey names a converted block: frame generation, whole-pixel position
// and template half-size.
type blockKey struct {
	gen     uint64
	x, y, r int
}
